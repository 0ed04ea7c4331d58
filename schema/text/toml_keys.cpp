#include "schema/text/toml_keys.hpp"

#include <cmath>

namespace lphi::text {

void TomlKeys::fail(const toml::node& node, const std::string& key, std::string message) {
  errors_->push_back({node.source().begin.line, key, std::move(message)});
}

std::string TomlKeys::dotted(std::string_view prefix, std::string_view name) {
  std::string out(prefix);
  if (!out.empty()) out += '.';
  out += name;
  return out;
}

namespace {

// A key's own line; a key made up by toml++ (of a dotted table) has none, and
// then the value's line stands for it.
std::size_t key_line(const toml::key& key, const toml::node& node) {
  return key.source().begin.line != 0 ? key.source().begin.line : node.source().begin.line;
}

}  // namespace

void TomlKeys::visit(const toml::table& table, std::string_view prefix, const Handlers& handlers) {
  for (auto&& [key, node] : table) {
    const std::string path = dotted(prefix, key.str());
    const auto it = handlers.find(std::string(key.str()));
    if (it == handlers.end()) {
      errors_->push_back({key_line(key, node), path, "unknown key"});
      continue;
    }
    it->second(node, path);
  }
}

std::size_t TomlKeys::unknown_keys(const toml::table& table, std::string_view prefix,
                                   std::initializer_list<std::string_view> known) {
  std::size_t count = 0;
  for (auto&& [key, node] : table) {
    bool ok = false;
    for (std::string_view k : known) ok = ok || key.str() == k;
    if (ok) continue;
    errors_->push_back({key_line(key, node), dotted(prefix, key.str()), "unknown key"});
    ++count;
  }
  return count;
}

std::optional<double> TomlKeys::number(const toml::node& n, const std::string& key) {
  double v = 0.0;
  if (n.is_floating_point()) {
    v = n.as_floating_point()->get();
  } else if (n.is_integer()) {
    v = static_cast<double>(n.as_integer()->get());
  } else {
    fail(n, key, "must be a number");
    return std::nullopt;
  }
  if (!std::isfinite(v)) {
    fail(n, key, "must be a finite number");
    return std::nullopt;
  }
  return v;
}

std::optional<std::int64_t> TomlKeys::integer(const toml::node& n, const std::string& key) {
  if (!n.is_integer()) {
    fail(n, key, "must be an integer");
    return std::nullopt;
  }
  return n.as_integer()->get();
}

std::optional<std::string> TomlKeys::string(const toml::node& n, const std::string& key) {
  if (!n.is_string()) {
    fail(n, key, "must be a string");
    return std::nullopt;
  }
  return n.as_string()->get();
}

std::optional<bool> TomlKeys::boolean(const toml::node& n, const std::string& key) {
  if (!n.is_boolean()) {
    fail(n, key, "must be true or false");
    return std::nullopt;
  }
  return n.as_boolean()->get();
}

const toml::table* TomlKeys::table(const toml::node& n, const std::string& key) {
  const toml::table* t = n.as_table();
  if (t == nullptr) fail(n, key, "must be a table");
  return t;
}

}  // namespace lphi::text
