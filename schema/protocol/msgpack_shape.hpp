// The shape check of a MessagePack frame, run before the codec decodes it.
//
// Internal to the wire codec (schema/protocol/codec.cpp); nothing else
// includes it. check_msgpack_shape walks the frame without recursion and
// promises that a frame it passes is complete, has no trailing bytes and nests
// at most max_msgpack_depth containers deep, so that nlohmann's reader, which
// recurses once per nesting level, cannot exhaust the stack on a hostile frame.
// It does not judge the values themselves (the codec's decoder does).
//
// A pure function without state: safe from any thread.
#pragma once

#include <cstddef>
#include <optional>
#include <string>
#include <string_view>

namespace lphi::protocol::detail {

constexpr std::size_t max_msgpack_depth = 32;

// Nothing when the frame is well formed, otherwise why it is not.
std::optional<std::string> check_msgpack_shape(std::string_view frame);

}  // namespace lphi::protocol::detail
