// The live-analysis keys of a [[sample]], the [alerts] hook and the events
// endpoint: values reach the pipeline's settings, mistakes name line and key.
#include <gtest/gtest.h>

#include <fstream>
#include <limits>

#include "daemon/config/config.hpp"
#include "daemon/config/data_dir.hpp"
#include "daemon/live/live_analysis.hpp"
#include "tests/support/temp_dir.hpp"

namespace {

using lphi::config::Config;
using lphi::config::parse_config;

const char* sources =
    "[[source]]\nname = \"li\"\nkind = \"lockin\"\n"           // 1-3
    "[[source]]\nname = \"th\"\nkind = \"thermometer\"\n"      // 4-6
    "[[source]]\nname = \"mg\"\nkind = \"field\"\n"            // 7-9
    "[[sample]]\nname = \"s\"\nmodel = \"wire1d\"\nsquares = 50.0\n"  // 10-13
    "width_m = 100e-9\nthickness_m = 20e-9\nexcitation_a = 1e-9\n"    // 14-16
    "lockin = \"li\"\nthermometer = \"th\"\nfield = \"mg\"\n";        // 17-19

TEST(LiveConfig, AnalysisKeysReachThePipelineSettings) {
  const std::string text = std::string(sources) +
                           "combine_up_down = true\n"
                           "sweep_min_span_t = 0.4\n"
                           "reversal_tolerance_t = 2e-3\n"
                           "plateau_relative_spread = 0.01\n"
                           "plateau_min_duration_s = 120\n"
                           "max_age_temperature_s = 10.0\n"
                           "max_age_field_s = 1.0\n"
                           "max_hold_s = 20.0\n"
                           "settling_time_constants = 7.0\n"
                           "probe_length_m = 5e-6\n"
                           "fit_window_t = 0.2\n"
                           "excitation_ratio_max = 0.5\n"
                           "new_cooldown_above_k = 4.0\n"
                           "[daemon]\nevents_endpoint = \"tcp://127.0.0.1:5999\"\n";
  Config c;
  const auto errors = parse_config(text, c);
  for (const auto& e : errors) ADD_FAILURE() << lphi::config::format_error("test", e);
  ASSERT_EQ(c.samples.size(), 1u);
  EXPECT_EQ(c.events_endpoint, "tcp://127.0.0.1:5999");
  const auto s = lphi::live::sample_settings(c.samples[0]);
  EXPECT_EQ(s.model, lphi::mc::Model::wire1d);
  EXPECT_TRUE(s.combine_up_down);
  EXPECT_EQ(s.segmenter.min_span_t, 0.4);
  EXPECT_EQ(s.segmenter.reversal_tolerance_t, 2e-3);
  EXPECT_EQ(s.segmenter.plateau.relative_spread, 0.01);
  EXPECT_EQ(s.segmenter.plateau.min_duration_s, 120.0);
  EXPECT_EQ(s.segmenter.settling_time_constants, 7.0);
  EXPECT_EQ(s.aligner.max_age_temperature_s, 10.0);
  EXPECT_EQ(s.aligner.max_age_field_s, 1.0);
  EXPECT_EQ(s.aligner.max_hold_s, 20.0);
  EXPECT_EQ(s.probe_length_m, std::optional<double>(5e-6));
  EXPECT_EQ(s.fit_window_t, std::optional<double>(0.2));
  EXPECT_EQ(s.heating.max_ratio, 0.5);
  EXPECT_EQ(s.new_cooldown_above_k, 4.0);
  EXPECT_EQ(s.gain, 1.0);  // no gain given: no preamplifier
  EXPECT_EQ(lphi::live::validate(s), "");
}

TEST(LiveConfig, DefaultsAreTheAnalysisOptionDefaults) {
  Config c;
  ASSERT_TRUE(parse_config(sources, c).empty());
  const auto s = lphi::live::sample_settings(c.samples[0]);
  const lphi::segment::SegmenterOptions seg;
  const lphi::align::AlignerOptions al;
  EXPECT_EQ(s.segmenter.min_span_t, seg.min_span_t);
  EXPECT_EQ(s.segmenter.reversal_tolerance_t, seg.reversal_tolerance_t);
  EXPECT_EQ(s.segmenter.plateau.relative_spread, seg.plateau.relative_spread);
  EXPECT_EQ(s.segmenter.plateau.min_duration_s, seg.plateau.min_duration_s);
  EXPECT_EQ(s.segmenter.settling_time_constants, seg.settling_time_constants);
  EXPECT_EQ(s.aligner.max_age_temperature_s, al.max_age_temperature_s);
  EXPECT_EQ(s.aligner.max_age_field_s, al.max_age_field_s);
  EXPECT_EQ(s.aligner.max_hold_s, al.max_hold_s);
  EXPECT_FALSE(s.combine_up_down);
  EXPECT_EQ(s.new_cooldown_above_k, lphi::live::SampleSettings{}.new_cooldown_above_k);
}

TEST(LiveConfig, ANewCooldownThresholdMustBeAPositiveTemperature) {
  for (const char* bad : {"0.0", "-4.0", "\"warm\""}) {
    Config c;
    const auto errors = parse_config(std::string(sources) + "new_cooldown_above_k = " + bad + "\n", c);
    bool named = false;
    for (const auto& e : errors) named = named || (e.key == "sample[0].new_cooldown_above_k" && e.line == 20);
    EXPECT_TRUE(named) << bad;
  }
  // The pipeline refuses what the config would not give it.
  lphi::live::SampleSettings s;
  s.name = "s";
  s.excitation_a = 1e-9;
  s.geometry.squares = 1.0;
  ASSERT_EQ(lphi::live::validate(s), "");
  s.new_cooldown_above_k = std::numeric_limits<double>::infinity();
  EXPECT_NE(lphi::live::validate(s).find("new_cooldown_above_k"), std::string::npos);
}

TEST(LiveConfig, MistakesNameLineAndKey) {
  const std::string text = std::string(sources) +
                           "combine_up_down = \"yes\"\n"  // 20
                           "sweep_min_span_t = -0.1\n"    // 21
                           "max_hold_s = 1.0\n"           // 22: below the 30 s default age
                           "[alerts]\n"                   // 23
                           "no_such_rule = 1\n"           // 24
                           "[daemon]\n"
                           "events_endpoint = \"udp://x\"\n";
  Config c;
  const auto errors = parse_config(text, c);
  auto has = [&](const std::string& key, std::size_t line) {
    for (const auto& e : errors) {
      if (e.key == key && (line == 0 || e.line == line)) return true;
    }
    return false;
  };
  EXPECT_TRUE(has("sample[0].combine_up_down", 20));
  EXPECT_TRUE(has("sample[0].sweep_min_span_t", 21));
  EXPECT_TRUE(has("sample[0].max_hold_s", 0));
  EXPECT_TRUE(has("daemon.events_endpoint", 0));
  bool alert_key = false;
  for (const auto& e : errors) alert_key = alert_key || e.key.find("alerts.no_such_rule") != std::string::npos;
  EXPECT_TRUE(alert_key) << "the [alerts] table is checked by its parser";
}

TEST(LiveConfig, TheEventsEndpointIsRecordedForClients) {
  lphi::testing::TempDir dir;
  auto e = lphi::config::daemon_endpoints(dir.path(), "", "", "");
  EXPECT_EQ(e.events, "ipc://" + dir.path() + "/events.sock");
  e.events = "tcp://127.0.0.1:6001";
  ASSERT_FALSE(lphi::config::write_endpoints_file(dir.path(), e).has_value());
  EXPECT_EQ(lphi::config::client_endpoints(dir.path()).events, "tcp://127.0.0.1:6001");
  // Without the file, clients assume the default socket in the directory.
  lphi::testing::TempDir empty;
  EXPECT_EQ(lphi::config::client_endpoints(empty.path()).events, "ipc://" + empty.path() + "/events.sock");
}

}  // namespace
