// The TOML config: the printed example parses as printed, and errors name the
// line and the key (line numbers counted in the test's own text).
#include <gtest/gtest.h>

#include "daemon/config/config.hpp"

namespace lphi::config {
namespace {

TEST(Config, TheExampleParsesAsPrinted) {
  Config c;
  const auto errors = parse_config(example_config(), c);
  for (const auto& e : errors) ADD_FAILURE() << format_error("example", e);
  ASSERT_EQ(c.sources.size(), 3u);
  EXPECT_EQ(c.sources[1].kind, protocol::SourceKind::thermometer);
  ASSERT_EQ(c.samples.size(), 1u);
  EXPECT_DOUBLE_EQ(c.samples[0].squares, 5.0);
  EXPECT_DOUBLE_EQ(c.samples[0].width_m, 20e-6);
  EXPECT_FALSE(c.synchronous_full);
}

TEST(Config, UnknownKeysWrongTypesAndBadReferencesNameLineAndKey) {
  const char* text =
      "[store]\n"                     // 1
      "synchronus = \"full\"\n"       // 2: typo
      "commit_max_ms = \"fast\"\n"    // 3: wrong type
      "[[source]]\n"                  // 4
      "name = \"mxc\"\n"              // 5
      "kind = \"thermometer\"\n"      // 6
      "[[sample]]\n"                  // 7
      "name = \"film-a\"\n"           // 8
      "model = \"hln3d\"\n"           // 9: not a model
      "squares = -5.0\n"              // 10: not positive
      "width_m = 20e-6\n"
      "thickness_m = 10e-9\n"
      "excitation_a = 10e-9\n"
      "lockin = \"mxc\"\n"            // 14: a thermometer, not a lock-in
      "thermometer = \"mxc\"\n"
      "field = \"magnet\"\n";         // 16: no such source
  Config c;
  const auto errors = parse_config(text, c);
  auto has = [&](std::size_t line, const std::string& key, const std::string& words) {
    for (const auto& e : errors) {
      if (e.line == line && e.key == key && e.message.find(words) != std::string::npos) return true;
    }
    return false;
  };
  EXPECT_TRUE(has(2, "store.synchronus", "unknown key"));
  EXPECT_TRUE(has(3, "store.commit_max_ms", "integer"));
  EXPECT_TRUE(has(9, "sample[0].model", "hln2d"));
  EXPECT_TRUE(has(10, "sample[0].squares", "positive"));
  EXPECT_TRUE(has(7, "sample[0].lockin", "not a lockin"));
  EXPECT_TRUE(has(7, "sample[0].field", "magnet"));
  EXPECT_EQ(errors.size(), 6u);
  for (const auto& e : errors) EXPECT_NE(format_error("f.toml", e).find("f.toml:"), std::string::npos);
}

TEST(Config, SyntaxErrorsNameTheLine) {
  Config c;
  const auto errors = parse_config("[daemon]\nlog_level = \n", c);
  ASSERT_EQ(errors.size(), 1u);
  EXPECT_EQ(errors[0].line, 2u);
}

}  // namespace
}  // namespace lphi::config
