// schema/text/toml_keys.hpp: the one checker of TOML keys and value types.
// The documents are parsed by toml++ itself, so the lines are those that
// TOML's own line counting gives (1-based, as an editor shows).
#include <gtest/gtest.h>

#include <string>
#include <vector>

#include "schema/text/toml_keys.hpp"

namespace lphi::text {
namespace {

TEST(TomlKeys, UnknownKeysAreNamedWithTheirLineAndPath) {
  const toml::table doc = toml::parse("[store]\nsync = true\n\nsynchronus = 1\n[sample]\nsquares = 2\n");
  std::vector<TomlError> errors;
  TomlKeys keys(errors);
  bool sync = false;
  keys.visit(*doc["store"].as_table(), "store",
             {{"sync", [&](const toml::node& n, const std::string& k) { sync = *keys.boolean(n, k); }}});
  EXPECT_TRUE(sync);
  ASSERT_EQ(errors.size(), 1u);
  EXPECT_EQ(errors[0].line, 4u);
  EXPECT_EQ(errors[0].key, "store.synchronus");
  EXPECT_EQ(errors[0].message, "unknown key");

  errors.clear();
  EXPECT_EQ(keys.unknown_keys(*doc["sample"].as_table(), "sample", {"width_m"}), 1u);
  ASSERT_EQ(errors.size(), 1u);
  EXPECT_EQ(errors[0].line, 6u);
  EXPECT_EQ(errors[0].key, "sample.squares");
  // At the top level the key is its own path.
  errors.clear();
  EXPECT_EQ(keys.unknown_keys(doc, "", {"store"}), 1u);
  EXPECT_EQ(errors.at(0).key, "sample");
}

TEST(TomlKeys, TypeErrorsNameTheExpectedType) {
  const toml::table doc = toml::parse("a = \"x\"\nb = 1.5\nc = 3\nd = inf\ne = [1]\n");
  std::vector<TomlError> errors;
  TomlKeys keys(errors);
  EXPECT_FALSE(keys.number(*doc.get("a"), "a"));
  EXPECT_EQ(keys.number(*doc.get("b"), "b"), 1.5);
  EXPECT_EQ(keys.number(*doc.get("c"), "c"), 3.0);  // an integer is a number
  EXPECT_FALSE(keys.number(*doc.get("d"), "d"));
  EXPECT_FALSE(keys.integer(*doc.get("b"), "b"));
  EXPECT_EQ(keys.integer(*doc.get("c"), "c"), 3);
  EXPECT_FALSE(keys.string(*doc.get("c"), "c"));
  EXPECT_EQ(keys.string(*doc.get("a"), "a"), "x");
  EXPECT_FALSE(keys.boolean(*doc.get("a"), "a"));
  EXPECT_EQ(keys.table(*doc.get("e"), "e"), nullptr);
  const std::vector<std::string> expected = {"a: must be a number", "d: must be a finite number",
                                             "b: must be an integer", "c: must be a string",
                                             "a: must be true or false", "e: must be a table"};
  ASSERT_EQ(errors.size(), expected.size());
  for (std::size_t i = 0; i < errors.size(); ++i) {
    EXPECT_EQ(errors[i].key + ": " + errors[i].message, expected[i]);
    EXPECT_EQ(errors[i].line, std::string("abcde").find(errors[i].key[0]) + 1) << errors[i].key;
  }
}

}  // namespace
}  // namespace lphi::text
