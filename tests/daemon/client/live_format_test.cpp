// The human output of the live-analysis commands (daemon/client/live_format.hpp).
#include <gmock/gmock.h>
#include <gtest/gtest.h>

#include <cmath>
#include <sstream>

#include "daemon/client/live_format.hpp"

namespace {

using lphi::client::event_line;
using lphi::client::format_temperature;
using lphi::client::format_utc;
using nlohmann::json;
using ::testing::HasSubstr;

// Reference instants: the Unix epoch is 1970-01-01T00:00:00Z by definition
// (POSIX, "Seconds Since the Epoch"); the others were converted with
// Python's datetime.fromtimestamp(t, timezone.utc) (python3, Debian 12).
TEST(LiveFormat, UtcTimesAgreeWithAnIndependentCalendar) {
  EXPECT_EQ(format_utc(0.0), "1970-01-01T00:00:00Z");
  EXPECT_EQ(format_utc(1e9), "2001-09-09T01:46:40Z");
  EXPECT_EQ(format_utc(1234567890.0), "2009-02-13T23:31:30Z");
  // Fractions are cut, not rounded: 22:13:20.9 is still second 20.
  EXPECT_EQ(format_utc(1700000000.9), "2023-11-14T22:13:20Z");
  EXPECT_EQ(format_utc(253402300799.0), "9999-12-31T23:59:59Z");
  // Outside four-digit years, or not a number: a dash, not a wrong date.
  EXPECT_EQ(format_utc(253402300800.0), "-");
  EXPECT_EQ(format_utc(std::nan("")), "-");
}

TEST(LiveFormat, TemperaturesInMillikelvinBelowOneKelvin) {
  EXPECT_EQ(format_temperature(0.25), "250 mK");
  EXPECT_EQ(format_temperature(0.0125, 0.0004), "12.50 +/- 0.40 mK");
  EXPECT_EQ(format_temperature(1.5), "1.5 K");
  EXPECT_EQ(format_temperature(4.2, 0.05), "4.200 +/- 0.050 K");
}

TEST(LiveFormat, FitsTableShowsReadableUnitsAndDashesForNull) {
  const json fits = json::parse(R"([
    {"sample":"film-a","sweep_index":3,"temperature_k":0.25,"lphi_m":2.123e-7,"lphi_err_m":1.5e-9,
     "alpha":0.98,"alpha_err":0.02,"lso_m":null,"chi2_red":1.04,"n_points":801,"field_window_t":0.02,
     "used_in_dephasing":true,"ok":true,"converged":true,"flags":[],"combined_with":null},
    {"sample":"film-a","sweep_index":4,"temperature_k":0.25,"lphi_m":null,"ok":false,
     "error":"too few points","used_in_dephasing":false}])");
  std::ostringstream out;
  lphi::client::print_fits_table(fits, out);
  const std::string text = out.str();
  EXPECT_THAT(text, HasSubstr("250 mK"));
  EXPECT_THAT(text, HasSubstr("212.3 +/- 1.5 nm"));
  EXPECT_THAT(text, HasSubstr("0.980 +/- 0.020"));
  EXPECT_THAT(text, HasSubstr("20 mT"));
  EXPECT_THAT(text, HasSubstr("failed: too few points"));
  // Header plus two rows.
  EXPECT_EQ(std::count(text.begin(), text.end(), '\n'), 3);
}

// The field axis and the advice: the offset each sweep was centred on, in mT
// with its error, in the sweeps and fits tables; a fit left out of L_phi(T)
// shows why, and the advice line appears in the tables and the watch line.
TEST(LiveFormat, FieldOffsetReasonsAndAdviceAreShown) {
  const json sweeps = json::parse(R"([{"sample":"film-a","cooldown":1,"index":5,"direction":"down",
    "t_start":1e9,"t_end":1.000001e9,"n_points":998,"temperature_k":0.03,"fitted":true,
    "field_offset_t":3.1e-4,"field_offset_err_t":2e-6,
    "advice":"the field offset is 0.31 mT: the magnet holds a remanent field"}])");
  std::ostringstream out;
  lphi::client::print_sweeps_table(sweeps, out);
  EXPECT_THAT(out.str(), HasSubstr("0.3100 +/- 0.0020 mT"));
  EXPECT_THAT(out.str(), HasSubstr("the magnet holds a remanent field"));
  const json fits = json::parse(R"([{"sample":"film-a","cooldown":1,"sweep_index":5,"temperature_k":0.03,
    "lphi_m":1e-6,"lphi_err_m":1e-8,"ok":true,"converged":true,"used_in_dephasing":false,
    "quality":["temperature-ramp: the temperature changed by 40.0 %"],
    "field_offset_t":3.1e-4,"field_offset_err_t":2e-6,
    "advice":"slow the sweep to 0.5 mT/min near zero field"}])");
  std::ostringstream f;
  lphi::client::print_fits_table(fits, f);
  EXPECT_THAT(f.str(), HasSubstr("0.3100 +/- 0.0020 mT"));
  EXPECT_THAT(f.str(), HasSubstr("temperature-ramp: the temperature changed by 40.0 %"));
  EXPECT_THAT(f.str(), HasSubstr("advice: slow the sweep to 0.5 mT/min near zero field"));
  const std::string line = event_line("fit", fits[0]);
  EXPECT_THAT(line, HasSubstr("field offset 0.3100 +/- 0.0020 mT"));
  EXPECT_THAT(line, HasSubstr("not used"));
  EXPECT_THAT(line, HasSubstr("; advice: slow the sweep to 0.5 mT/min near zero field"));
}

// The cooldown a sweep, fit or verdict belongs to is shown beside its
// index: the second column of the tables, a row of the verdict.
TEST(LiveFormat, TablesShowTheCooldown) {
  const json sweeps = json::parse(R"([{"sample":"film-a","cooldown":2,"index":14,"direction":"up",
    "t_start":1e9,"t_end":1.000001e9,"n_points":998,"temperature_k":0.3,"fitted":true}])");
  std::ostringstream out;
  lphi::client::print_sweeps_table(sweeps, out);
  const std::string text = out.str();
  const std::string first_line = text.substr(0, text.find('\n'));
  EXPECT_THAT(first_line, HasSubstr("sample  cooldown  sweep"));
  EXPECT_THAT(text, HasSubstr("film-a  2         14"));
  const json fits = json::parse(R"([{"sample":"film-a","cooldown":2,"sweep_index":14,"temperature_k":0.3,
    "ok":true,"used_in_dephasing":true}])");
  std::ostringstream f;
  lphi::client::print_fits_table(fits, f);
  EXPECT_THAT(f.str(), HasSubstr("film-a  2         14"));
  const json verdicts = json::parse(R"([{"sample":"film-a","state":"power-law","cooldown":2}])");
  std::ostringstream v;
  lphi::client::print_verdicts(verdicts, v);
  EXPECT_THAT(v.str(), ::testing::ContainsRegex("cooldown +2\n"));
  EXPECT_THAT(event_line("verdict", verdicts[0]), HasSubstr(", cooldown 2"));
}

TEST(LiveFormat, VerdictAndAlertsAndEvents) {
  const json verdicts = json::parse(R"([{"sample":"film-a","state":"saturated","exponent_p":1.02,
    "exponent_p_err":0.05,"lphi_sat_m":1.2e-6,"lphi_sat_err_m":5e-8,"t_sat_k":0.08,"t_sat_err_k":0.01,
    "electrons_cooling":true,"likely_cause":"intrinsic","regime":"2d","aak_ratio":null,"n_points":8,
    "updated_at":1e9}])");
  std::ostringstream v;
  lphi::client::print_verdicts(verdicts, v);
  EXPECT_THAT(v.str(), HasSubstr("film-a: saturated"));
  EXPECT_THAT(v.str(), HasSubstr("1.200 +/- 0.050 um"));
  EXPECT_THAT(v.str(), HasSubstr("80 +/- 10 mK"));
  EXPECT_THAT(v.str(), HasSubstr("2001-09-09T01:46:40Z"));

  const json alerts = json::parse(R"([{"id":7,"rule":"lphi-range","severity":"warning","state":"raised",
    "raised_at":1e9,"acked_at":null,"cleared_at":null,"message":"L_phi 2 um above 1 um","subject":"film-a"}])");
  std::ostringstream a;
  lphi::client::print_alerts_table(alerts, a);
  EXPECT_THAT(a.str(), HasSubstr("lphi-range"));
  EXPECT_THAT(a.str(), HasSubstr("2001-09-09T01:46:40Z"));

  EXPECT_THAT(event_line("alert", alerts[0]), HasSubstr("alert #7 warning raised lphi-range [film-a]: L_phi"));
  EXPECT_THAT(event_line("verdict", verdicts[0]), HasSubstr("verdict film-a saturated, p 1.020 +/- 0.050"));
}

}  // namespace
