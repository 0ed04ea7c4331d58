// TomlKeys: the one checker of the keys and value types of lphi's TOML files
// (lphid's config, its [alerts] section, lphi-sim's scenario files).
//
// What it promises: every key it is asked about that the caller does not
// know is an error "unknown key" at the key's own line, named by its dotted
// path ("store.synchronus", "sample[2].squares"); a value of the wrong type is
// an error naming the expected type ("must be a number", "must be an
// integer", "must be a string", "must be true or false", "must be a table");
// a non-finite number is refused ("must be a finite number"). Errors are
// collected, not thrown, so that one run reports every mistake in a file.
//
// Thread safety: a checker and its error list belong to one thread.
#pragma once

#include <cstddef>
#include <cstdint>
#include <functional>
#include <initializer_list>
#include <map>
#include <optional>
#include <string>
#include <string_view>
#include <toml++/toml.h>
#include <vector>

namespace lphi::text {

struct TomlError {
  std::size_t line = 0;  // 1-based; 0 when the error has no place in the file
  std::string key;       // dotted, e.g. "sample[2].squares"
  std::string message;
};

class TomlKeys {
 public:
  // Called with a known key's value and its dotted path.
  using Handler = std::function<void(const toml::node&, const std::string& key)>;
  using Handlers = std::map<std::string, Handler>;

  explicit TomlKeys(std::vector<TomlError>& errors) : errors_(&errors) {}

  std::vector<TomlError>& errors() { return *errors_; }
  void fail(const toml::node& node, const std::string& key, std::string message);

  // "prefix.name", or "name" for an empty prefix.
  static std::string dotted(std::string_view prefix, std::string_view name);

  // Every key of `table`: a known one through its handler, the others as
  // "unknown key" errors.
  void visit(const toml::table& table, std::string_view prefix, const Handlers& handlers);
  // The keys of `table` not in `known` as "unknown key" errors; how many.
  std::size_t unknown_keys(const toml::table& table, std::string_view prefix,
                           std::initializer_list<std::string_view> known);

  // Typed values: the value, or nothing with a type error recorded.
  std::optional<double> number(const toml::node& n, const std::string& key);
  std::optional<std::int64_t> integer(const toml::node& n, const std::string& key);
  std::optional<std::string> string(const toml::node& n, const std::string& key);
  std::optional<bool> boolean(const toml::node& n, const std::string& key);
  const toml::table* table(const toml::node& n, const std::string& key);

 private:
  std::vector<TomlError>* errors_;
};

}  // namespace lphi::text
