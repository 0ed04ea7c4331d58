#include "schema/protocol/msgpack_shape.hpp"

#include <cstdint>
#include <vector>

namespace lphi::protocol::detail {

namespace {

std::uint64_t read_be(const unsigned char* p, std::size_t n) {
  std::uint64_t v = 0;
  for (std::size_t i = 0; i < n; ++i) v = (v << 8) | p[i];
  return v;
}

}  // namespace

std::optional<std::string> check_msgpack_shape(std::string_view frame) {
  const auto* data = reinterpret_cast<const unsigned char*>(frame.data());
  const std::size_t size = frame.size();
  std::size_t pos = 0;
  std::vector<std::uint64_t> pending{1};
  auto need = [&](std::size_t n) { return size - pos >= n; };
  while (!pending.empty()) {
    if (pending.back() == 0) {
      pending.pop_back();
      continue;
    }
    --pending.back();
    if (!need(1)) return "truncated MessagePack";
    const unsigned char b = data[pos++];
    std::uint64_t skip = 0;       // payload bytes after the header
    std::uint64_t children = 0;   // items inside a container
    bool container = false;
    auto sized = [&](std::size_t len_bytes, std::size_t extra) -> bool {
      if (!need(len_bytes)) return false;
      skip = read_be(data + pos, len_bytes) + extra;
      pos += len_bytes;
      return true;
    };
    auto counted = [&](std::size_t len_bytes, std::uint64_t per_entry) -> bool {
      if (!need(len_bytes)) return false;
      children = read_be(data + pos, len_bytes) * per_entry;
      pos += len_bytes;
      container = true;
      return true;
    };
    bool ok = true;
    if (b <= 0x7f || b >= 0xe0 || b == 0xc0 || b == 0xc2 || b == 0xc3) {
    } else if (b >= 0x80 && b <= 0x8f) {
      children = std::uint64_t{b & 0x0fu} * 2;
      container = true;
    } else if (b >= 0x90 && b <= 0x9f) {
      children = b & 0x0fu;
      container = true;
    } else if (b >= 0xa0 && b <= 0xbf) {
      skip = b & 0x1fu;
    } else {
      switch (b) {
        case 0xc4: ok = sized(1, 0); break;
        case 0xc5: ok = sized(2, 0); break;
        case 0xc6: ok = sized(4, 0); break;
        case 0xc7: ok = sized(1, 1); break;
        case 0xc8: ok = sized(2, 1); break;
        case 0xc9: ok = sized(4, 1); break;
        case 0xca: skip = 4; break;
        case 0xcb: skip = 8; break;
        case 0xcc: case 0xd0: skip = 1; break;
        case 0xcd: case 0xd1: skip = 2; break;
        case 0xce: case 0xd2: skip = 4; break;
        case 0xcf: case 0xd3: skip = 8; break;
        case 0xd4: skip = 2; break;
        case 0xd5: skip = 3; break;
        case 0xd6: skip = 5; break;
        case 0xd7: skip = 9; break;
        case 0xd8: skip = 17; break;
        case 0xd9: ok = sized(1, 0); break;
        case 0xda: ok = sized(2, 0); break;
        case 0xdb: ok = sized(4, 0); break;
        case 0xdc: ok = counted(2, 1); break;
        case 0xdd: ok = counted(4, 1); break;
        case 0xde: ok = counted(2, 2); break;
        case 0xdf: ok = counted(4, 2); break;
        default: return "byte 0xc1 is not MessagePack";
      }
    }
    if (!ok || skip > size - pos) return "truncated MessagePack";
    pos += skip;
    if (container && children > 0) {
      // Every item takes at least one byte: a count beyond the frame is a lie.
      if (children > size - pos) return "truncated MessagePack (a container claims more items than the frame holds)";
      if (pending.size() > max_msgpack_depth) return "MessagePack nested deeper than 32 levels";
      pending.push_back(children);
    }
  }
  if (pos != size) return "trailing bytes after the MessagePack message";
  return std::nullopt;
}

}  // namespace lphi::protocol::detail
