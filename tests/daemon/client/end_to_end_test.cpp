// End-to-end tests of the built lphi program: generate data with
// `lphi synth`, analyse it with `lphi fit --json` / `lphi dephasing --json`,
// and compare with the truth the data were made from.
//
// Tolerances:
//  - noise-free sweeps must give back the truth to 1e-6 relative: the data are
//    the model itself, so only the fit's convergence tolerance and the
//    shortest round-trip printing of the CSV (exact) stand in between;
//  - noisy data must agree with the truth within 3 of the reported 1-sigma
//    errors (common practice; a correct estimator fails this 0.3% of the time
//    per check, and the seeds are fixed, so the test is deterministic), and
//    each error is also required to be small (below a few percent) so that
//    the 3-sigma check cannot pass by a huge error bar.
//
// Bad input must give exit code 2 (exit_codes.hpp: exit_bad_input) and a
// message on stderr that names the line, the column and the problem.

#include <cmath>
#include <sstream>
#include <string>
#include <vector>

#include <gmock/gmock.h>
#include <gtest/gtest.h>
#include <nlohmann/json.hpp>

#include "analysis/magnetoconductance.hpp"
#include "daemon/client/exit_codes.hpp"
#include "tests/support/run_program.hpp"

namespace {

using lphi::testing::ProgramResult;
using lphi::testing::TempDir;
using ::testing::HasSubstr;
using nlohmann::json;

ProgramResult lphi_run(const std::vector<std::string>& args, const std::string& stdin_text = "") {
  return lphi::testing::run_program(LPHI_CLI_PROGRAM, args, stdin_text);
}

// Runs a command that must succeed and returns its stdout.
std::string lphi_ok(const std::vector<std::string>& args, const std::string& stdin_text = "") {
  const ProgramResult r = lphi_run(args, stdin_text);
  EXPECT_EQ(r.exit_code, 0) << "stderr: " << r.err;
  return r.out;
}

json lphi_json(const std::vector<std::string>& args, const std::string& stdin_text = "") {
  const ProgramResult r = lphi_run(args, stdin_text);
  EXPECT_EQ(r.exit_code, 0) << "stderr: " << r.err;
  try {
    return json::parse(r.out);
  } catch (const json::exception& e) {
    ADD_FAILURE() << "not JSON: " << e.what() << "\nstdout: " << r.out << "\nstderr: " << r.err;
    return json::object();
  }
}

// A CSV read independently of lphi's reader: header + numeric rows.
struct Table {
  std::vector<std::string> header;
  std::vector<std::vector<double>> rows;
  std::size_t column(const std::string& name) const {
    for (std::size_t i = 0; i < header.size(); ++i) {
      if (header[i] == name) return i;
    }
    ADD_FAILURE() << "no column " << name;
    return 0;
  }
};

Table read_table(const std::string& text) {
  Table t;
  std::istringstream in(text);
  std::string line;
  std::getline(in, line);
  std::istringstream h(line);
  for (std::string cell; std::getline(h, cell, ',');) t.header.push_back(cell);
  while (std::getline(in, line)) {
    std::istringstream l(line);
    std::vector<double> row;
    for (std::string cell; std::getline(l, cell, ',');) row.push_back(std::stod(cell));
    t.rows.push_back(row);
  }
  return t;
}

// Keeps field_t and one column, scaled by `factor`, under the name `as`.
std::string one_signal_column(const Table& t, const std::string& column, double factor,
                              const std::string& as) {
  const std::size_t b = t.column("field_t");
  const std::size_t c = t.column(column);
  std::ostringstream out;
  out.precision(17);
  out << "field_t," << as << "\n";
  for (const auto& row : t.rows) out << row[b] << ',' << row[c] * factor << '\n';
  return out.str();
}

double relative(double value, double truth) { return std::fabs(value - truth) / std::fabs(truth); }

void expect_within_3_sigma(const json& j, const std::string& key, const std::string& err_key,
                           double truth, double max_relative_error) {
  ASSERT_TRUE(j.contains(key) && j[key].is_number()) << j.dump();
  ASSERT_TRUE(j.contains(err_key) && j[err_key].is_number()) << j.dump();
  const double value = j[key].get<double>();
  const double err = j[err_key].get<double>();
  EXPECT_GT(err, 0.0) << key;
  EXPECT_LT(err, max_relative_error * std::fabs(truth)) << key << ": error bar too wide";
  EXPECT_LT(std::fabs(value - truth), 3.0 * err)
      << key << " = " << value << " +/- " << err << ", truth " << truth;
}

// ---------------------------------------------------------------- lphi fit

TEST(LphiFit, NoiseFreeHln2dFromRsqReturnsTheTruth) {
  TempDir dir;
  const double truth_lphi_m = 200e-9;
  const std::string csv = dir.write(
      "sweep.csv", lphi_ok({"synth", "sweep", "--lphi-m", "200e-9", "--max-field-t", "0.05"}));
  const json j = lphi_json({"fit", csv, "--json"});
  EXPECT_EQ(j["model"], "hln2d");
  EXPECT_EQ(j["input_column"], "rsq_ohm");
  EXPECT_LT(relative(j["lphi_m"].get<double>(), truth_lphi_m), 1e-6) << j.dump();
  ASSERT_TRUE(j["alpha"].is_number()) << j.dump();
  EXPECT_LT(relative(j["alpha"].get<double>(), 1.0), 1e-6) << j.dump();
  EXPECT_TRUE(j["converged"].get<bool>());
  EXPECT_TRUE(j["flags"].is_array());
  EXPECT_TRUE(j["lso_m"].is_null());
  // B_phi = hbar/(4 e L_phi^2) with the SI 2019 exact e and h
  // (analysis/PHYSICS.md, "2D weak localization (HLN)"):
  // 1.054571817e-34 / (4 * 1.602176634e-19 * (200e-9)^2) = 4.113825e-3 T
  // (hbar rounded to 10 digits, so 1e-8 relative; the fitted L_phi adds 2e-6).
  EXPECT_LT(relative(j["b_phi_t"].get<double>(), 4.113825e-3), 3e-6);
  // The data were made with R_sq(0) = 1000 ohm (synth's default).
  EXPECT_LT(relative(j["rsq0_ohm"].get<double>(), 1000.0), 1e-4);
}

TEST(LphiFit, NoisyHln2dFromStdinAgreesWithin3Sigma) {
  const std::string sweep = lphi_ok({"synth", "sweep", "--lphi-m", "200e-9", "--max-field-t",
                                     "0.05", "--noise-rsq-ohm", "0.02", "--seed", "7"});
  const json j = lphi_json({"fit", "-", "--json"}, sweep);
  expect_within_3_sigma(j, "lphi_m", "lphi_err_m", 200e-9, 0.05);
  expect_within_3_sigma(j, "alpha", "alpha_err", 1.0, 0.05);
  EXPECT_EQ(j["input"], "stdin");
}

TEST(LphiFit, FromResistanceWithSquares) {
  // R = R_sq * N (four-terminal practice; analysis/PHYSICS.md, "From the
  // measurement to the sheet conductance"): N = 12.5 squares.
  TempDir dir;
  const Table t = read_table(
      lphi_ok({"synth", "sweep", "--lphi-m", "150e-9", "--max-field-t", "0.08"}));
  const std::string csv = dir.write("r.csv", one_signal_column(t, "rsq_ohm", 12.5, "r_ohm"));
  const json j = lphi_json({"fit", csv, "--squares", "12.5", "--json"});
  EXPECT_EQ(j["input_column"], "r_ohm");
  EXPECT_LT(relative(j["lphi_m"].get<double>(), 150e-9), 1e-6) << j.dump();
  EXPECT_LT(relative(j["rsq0_ohm"].get<double>(), 1000.0), 1e-4) << j.dump();
}

TEST(LphiFit, FromLockinVoltageWithCurrentSquaresAndGain) {
  // Worked example of V_x = R_sq * N * I * gain: R_sq = 1000 ohm, N = 5
  // squares, I = 10 nA, gain 100 give V_x = 1000 * 5 * 1e-8 * 100 = 5e-3 V.
  TempDir dir;
  const Table t = read_table(lphi_ok({"synth", "sweep", "--lphi-m", "200e-9", "--max-field-t",
                                      "0.05", "--squares", "5", "--current", "1e-8", "--gain",
                                      "100"}));
  ASSERT_EQ(t.header, (std::vector<std::string>{"field_t", "rsq_ohm", "lockin_x_v"}));
  const std::size_t b = t.column("field_t"), r = t.column("rsq_ohm"), v = t.column("lockin_x_v");
  std::size_t nearest_zero = 0;
  for (std::size_t i = 0; i < t.rows.size(); ++i) {
    // Every row obeys the relation (to rounding: one product of doubles).
    EXPECT_NEAR(t.rows[i][v], t.rows[i][r] * 5e-6, 1e-15 * t.rows[i][v]);
    if (std::fabs(t.rows[i][b]) < std::fabs(t.rows[nearest_zero][b])) nearest_zero = i;
  }
  // At zero field (Delta sigma = 0) the worked example's 5 mV.
  EXPECT_NEAR(t.rows[nearest_zero][v], 5e-3, 5e-3 * 1e-6);

  const std::string csv = dir.write("lockin.csv", one_signal_column(t, "lockin_x_v", 1.0,
                                                                    "lockin_x_v"));
  const json j = lphi_json(
      {"fit", csv, "--current", "1e-8", "--squares", "5", "--gain", "100", "--json"});
  EXPECT_EQ(j["input_column"], "lockin_x_v");
  EXPECT_LT(relative(j["lphi_m"].get<double>(), 200e-9), 1e-6) << j.dump();
  EXPECT_LT(relative(j["rsq0_ohm"].get<double>(), 1000.0), 1e-4) << j.dump();

  // Forgetting the gain makes R_sq 100 times too large: the gain is applied.
  const json no_gain = lphi_json({"fit", csv, "--current", "1e-8", "--squares", "5", "--json"});
  EXPECT_LT(relative(no_gain["rsq0_ohm"].get<double>(), 1e5), 1e-4) << no_gain.dump();
}

TEST(LphiFit, Wire1dNoiseFreeAndNoisy) {
  TempDir dir;
  const std::vector<std::string> synth = {"synth",     "sweep",     "--model",       "wire1d",
                                          "--lphi-m",  "500e-9",    "--width-m",     "50e-9",
                                          "--max-field-t", "0.3"};
  const std::string clean = dir.write("clean.csv", lphi_ok(synth));
  const json j = lphi_json({"fit", clean, "--model", "wire1d", "--width-m", "50e-9",
                            "--squares", "40", "--json"});
  EXPECT_EQ(j["model"], "wire1d");
  EXPECT_LT(relative(j["lphi_m"].get<double>(), 500e-9), 1e-6) << j.dump();
  EXPECT_TRUE(j["alpha"].is_null());

  std::vector<std::string> noisy_args = synth;
  noisy_args.insert(noisy_args.end(), {"--noise-rsq-ohm", "0.02", "--seed", "3"});
  const std::string noisy = dir.write("noisy.csv", lphi_ok(noisy_args));
  const json n = lphi_json({"fit", noisy, "--model", "wire1d", "--width-m", "50e-9",
                            "--squares", "40", "--json"});
  expect_within_3_sigma(n, "lphi_m", "lphi_err_m", 500e-9, 0.05);
}

TEST(LphiFit, Hln2dSpinOrbitFitsLphiAndLso) {
  TempDir dir;
  const std::vector<std::string> synth = {"synth",   "sweep",         "--model", "hln2d-so",
                                          "--lphi-m", "300e-9",       "--lso-m", "100e-9",
                                          "--max-field-t", "0.1"};
  const json clean = lphi_json({"fit", "-", "--model", "hln2d-so", "--json"}, lphi_ok(synth));
  // --model takes "hln2d-so"; JSON carries the analysis library's name.
  EXPECT_EQ(clean["model"], std::string(lphi::mc::model_name(lphi::mc::Model::hln2d_so)));
  EXPECT_LT(relative(clean["lphi_m"].get<double>(), 300e-9), 1e-6) << clean.dump();
  ASSERT_TRUE(clean["lso_m"].is_number()) << clean.dump();
  EXPECT_LT(relative(clean["lso_m"].get<double>(), 100e-9), 1e-6) << clean.dump();

  std::vector<std::string> noisy_args = synth;
  noisy_args.insert(noisy_args.end(), {"--noise-rsq-ohm", "0.01", "--seed", "11"});
  const json n = lphi_json({"fit", "-", "--model", "hln2d-so", "--json"}, lphi_ok(noisy_args));
  expect_within_3_sigma(n, "lphi_m", "lphi_err_m", 300e-9, 0.05);
  expect_within_3_sigma(n, "lso_m", "lso_err_m", 100e-9, 0.10);
}

TEST(LphiFit, HumanTableShowsUnitsForReading) {
  const std::string sweep =
      lphi_ok({"synth", "sweep", "--lphi-m", "200e-9", "--max-field-t", "0.05"});
  const std::string out = lphi_ok({"fit", "-"}, sweep);
  EXPECT_THAT(out, HasSubstr("L_phi"));
  // Noise-free: 200 nm to 8 significant digits, with the (tiny) error beside it.
  EXPECT_THAT(out, ::testing::ContainsRegex("L_phi +[0-9.]+ [+]/- [0-9.e-]+ nm"));
  EXPECT_THAT(out, ::testing::ContainsRegex("B_phi +4.114 mT"));  // 4.113825 mT, see above
  EXPECT_THAT(out, HasSubstr("mT"));
  EXPECT_THAT(out, HasSubstr("chi2_red"));
  EXPECT_THAT(out, HasSubstr("flags"));
}

// ---------------------------------------------------------- lphi dephasing

TEST(LphiDephasing, SaturatedTableGivesSaturatedVerdict) {
  // Truth: L_phi(1 K) = 500 nm without saturation, p = 1, T_sat = 100 mK;
  // 12 temperatures from 20 mK to 1 K, 3% noise.
  const std::string table = lphi_ok({"synth", "dephasing", "--lphi-1k-m", "500e-9", "--p", "1",
                                     "--t-sat-k", "0.1", "--seed", "5"});
  const Table t = read_table(table);
  ASSERT_EQ(t.header, (std::vector<std::string>{"temperature_k", "lphi_m", "lphi_err_m"}));
  ASSERT_EQ(t.rows.size(), 12u);
  // Log-spaced from t-min to t-max (defaults 0.02 and 1 K): exact end points.
  EXPECT_NEAR(t.rows.front()[0], 0.02, 1e-15);
  EXPECT_NEAR(t.rows.back()[0], 1.0, 1e-15);

  const json j = lphi_json({"dephasing", "-", "--json"}, table);
  EXPECT_EQ(j["state"], "saturated") << j.dump();
  EXPECT_EQ(j["n_points"], 12);
  expect_within_3_sigma(j, "exponent_p", "exponent_p_err", 1.0, 0.3);
  expect_within_3_sigma(j, "t_sat_k", "t_sat_err_k", 0.1, 0.5);
  // L_sat = L1 * T_sat^(-p/2) = 500 nm / sqrt(0.1) = 1.5811 um.
  expect_within_3_sigma(j, "lphi_sat_m", "lphi_sat_err_m", 500e-9 / std::sqrt(0.1), 0.2);
  EXPECT_LT(j["p_value"].get<double>(), 0.01);
}

TEST(LphiDephasing, PowerLawTableGivesPowerLawVerdict) {
  TempDir dir;
  const std::string csv = dir.write(
      "t.csv", lphi_ok({"synth", "dephasing", "--lphi-1k-m", "500e-9", "--p", "1", "--seed", "2"}));
  const json j = lphi_json({"dephasing", csv, "--json"});
  EXPECT_EQ(j["state"], "power-law") << j.dump();
  ASSERT_TRUE(j["power_law"].is_object());
  const json& pl = j["power_law"];
  EXPECT_LT(std::fabs(pl["exponent_p"].get<double>() - 1.0),
            3.0 * pl["exponent_p_err"].get<double>())
      << pl.dump();
  EXPECT_LT(pl["exponent_p_err"].get<double>(), 0.2);
  // b = L1^-2 = 4e12 m^-2 K^-1.
  EXPECT_LT(std::fabs(pl["prefactor_b"].get<double>() - 4e12),
            3.0 * pl["prefactor_b_err"].get<double>())
      << pl.dump();
}

TEST(LphiDephasing, HumanTableSpellsOutStateAndTsatInMillikelvin) {
  const std::string table = lphi_ok({"synth", "dephasing", "--lphi-1k-m", "500e-9",
                                     "--t-sat-k", "0.1", "--seed", "5"});
  const std::string out = lphi_ok({"dephasing", "-"}, table);
  EXPECT_THAT(out, HasSubstr("saturated: L_phi levels off below T_sat"));
  EXPECT_THAT(out, HasSubstr("T_sat"));
  EXPECT_THAT(out, HasSubstr("mK"));
}

// ---------------------------------------------------------------- bad input

void expect_bad_input(const ProgramResult& r, const std::vector<std::string>& mentions) {
  EXPECT_EQ(r.exit_code, lphi::client::exit_bad_input) << "stderr: " << r.err;
  EXPECT_TRUE(r.out.empty()) << "stdout: " << r.out;
  for (const auto& m : mentions) EXPECT_THAT(r.err, HasSubstr(m));
  // One line: the message ends with the only newline.
  EXPECT_EQ(r.err.find('\n'), r.err.size() - 1) << r.err;
}

// A valid sweep of n points from -0.01 T to 0.01 T with a 1000-ohm sheet.
std::string small_sweep(int n, const std::string& signal_column = "rsq_ohm") {
  std::ostringstream s;
  s << "field_t," << signal_column << "\n";
  for (int i = 0; i < n; ++i) {
    const double b = -0.01 + 0.02 * i / (n - 1);
    s << b << ',' << 1000.0 - 1e4 * b * b << '\n';
  }
  return s.str();
}

// The sweep: L_phi = 1 um read through a magnet holding 0.3 mT
// (the sample sees B_reading + 0.3 mT). Mirrored about the reading's zero it
// fitted 887 +- 7 nm; lphi fit centres the cusp first and quotes the offset.
TEST(LphiFit, RemanentFieldIsMeasuredAndCorrected) {
  const Table t = read_table(lphi_ok({"synth", "sweep", "--lphi-m", "1e-6", "--max-field-t",
                                      "0.02", "--noise-rsq-ohm", "0.2", "--seed", "4"}));
  const std::size_t b = t.column("field_t"), r = t.column("rsq_ohm");
  std::ostringstream csv;
  csv << "field_t,rsq_ohm\n";
  csv.precision(17);
  for (const auto& row : t.rows) csv << row[b] - 0.3e-3 << ',' << row[r] << '\n';
  const json j = lphi_json({"fit", "-", "--json"}, csv.str());
  ASSERT_TRUE(j["remanent_field_t"].is_number()) << j.dump();
  EXPECT_NEAR(j["remanent_field_t"].get<double>(), 0.3e-3,
              4.0 * j["field_offset_err_t"].get<double>());
  const double lphi = j["lphi_m"].get<double>();
  const double err = j["lphi_err_m"].get<double>() * j["error_scale"].get<double>();
  EXPECT_NEAR(lphi, 1e-6, std::max(3.0 * err, 0.05e-6)) << j.dump();
  EXPECT_TRUE(j.contains("sigma0_s"));
  EXPECT_FALSE(j.contains("sigma_zero_s"));
  EXPECT_TRUE(j["chi2_red"].is_number());
  EXPECT_TRUE(j["advice"].is_string());
  const std::string out = lphi_ok({"fit", "-"}, csv.str());
  EXPECT_THAT(out, HasSubstr("field offset"));
  EXPECT_THAT(out, HasSubstr("against the sweep's own noise"));
}

// A sweep without weak localization (alpha = 0, only noise) is said to be
// flat, with the fit's failure code, not fitted to an absurd length.
TEST(LphiFit, FlatSweepIsReportedAsSuch) {
  const std::string sweep = lphi_ok({"synth", "sweep", "--lphi-m", "1e-6", "--alpha", "0", "--max-field-t", "0.02",
                                     "--noise-rsq-ohm", "0.5", "--seed", "2"});
  const ProgramResult r = lphi_run({"fit", "-"}, sweep);
  EXPECT_EQ(r.exit_code, lphi::client::exit_failure) << r.err;
  EXPECT_THAT(r.out, HasSubstr("no weak-localization signal above the noise"));
  const ProgramResult j = lphi_run({"fit", "-", "--json"}, sweep);
  EXPECT_EQ(j.exit_code, lphi::client::exit_failure);
  const json parsed = json::parse(j.out);
  EXPECT_TRUE(parsed["lphi_m"].is_null()) << j.out;
  EXPECT_TRUE(parsed["flat"].get<bool>());
  EXPECT_FALSE(parsed["usable"].get<bool>());
}

TEST(LphiFitBadInput, MissingFile) {
  TempDir dir;
  const std::string path = dir.file("absent.csv");
  expect_bad_input(lphi_run({"fit", path}), {path, "cannot open"});
}

TEST(LphiFitBadInput, MissingColumns) {
  expect_bad_input(lphi_run({"fit", "-"}, "field_t,temperature_k\n0,1\n"),
                   {"missing a signal column", "rsq_ohm", "r_ohm", "lockin_x_v"});
  expect_bad_input(lphi_run({"fit", "-"}, "b_t,rsq_ohm\n0,1\n"),
                   {"missing column 'field_t'"});
}

TEST(LphiFitBadInput, NonNumericCell) {
  std::string sweep = small_sweep(40);
  // Line 6 of the file (header is line 1): replace its value.
  std::istringstream in(sweep);
  std::ostringstream out;
  std::string line;
  for (int n = 1; std::getline(in, line); ++n) out << (n == 6 ? "-0.0087,12x4" : line) << '\n';
  expect_bad_input(lphi_run({"fit", "-"}, out.str()),
                   {"stdin line 6, column 'rsq_ohm'", "'12x4' is not a number"});
}

TEST(LphiFitBadInput, NanCell) {
  expect_bad_input(lphi_run({"fit", "-"}, "field_t,rsq_ohm\n# comment\n-0.01,1000\nnan,1000\n"),
                   {"line 4, column 'field_t'", "'nan' is not a finite number"});
}

TEST(LphiFitBadInput, NonPositiveResistance) {
  expect_bad_input(lphi_run({"fit", "-"}, "field_t,rsq_ohm\n-0.01,1000\n0.01,-5\n"),
                   {"line 3, column 'rsq_ohm'", "must be positive"});
}

TEST(LphiFitBadInput, TooFewPoints) {
  const ProgramResult r = lphi_run({"fit", "-"}, small_sweep(6));
  expect_bad_input(r, {"stdin"});
  EXPECT_THAT(r.err, ::testing::ContainsRegex("fewer|too few"));
}

TEST(LphiFitBadInput, RowWithWrongCellCount) {
  expect_bad_input(lphi_run({"fit", "-"}, "field_t,rsq_ohm\n-0.01,1000\n0.01\n"),
                   {"stdin line 3", "row has 1 cell, the header has 2 columns"});
}

TEST(LphiFitBadInput, NoDataRows) {
  expect_bad_input(lphi_run({"fit", "-"}, "field_t,rsq_ohm\n"), {"no data rows"});
}

TEST(LphiFitBadInput, SweepThatNeverCrossesZero) {
  std::ostringstream s;
  s << "field_t,rsq_ohm\n";
  for (int i = 0; i < 50; ++i) s << 0.001 + 0.001 * i << ",1000\n";
  expect_bad_input(lphi_run({"fit", "-"}, s.str()),
                   {"column 'field_t'", "never crosses zero field"});
}

TEST(LphiFitBadInput, LockinWithoutCurrentOrSquares) {
  const std::string sweep = small_sweep(40, "lockin_x_v");
  expect_bad_input(lphi_run({"fit", "-", "--squares", "5"}, sweep),
                   {"lockin_x_v", "needs --current"});
  expect_bad_input(lphi_run({"fit", "-", "--current", "1e-8"}, sweep),
                   {"lockin_x_v", "needs --squares"});
  expect_bad_input(lphi_run({"fit", "-"}, small_sweep(40, "r_ohm")), {"r_ohm", "--squares"});
}

TEST(LphiFitBadInput, ModelAndGeometryOptions) {
  const std::string sweep = small_sweep(40);
  expect_bad_input(lphi_run({"fit", "-", "--model", "hln3d"}, sweep),
                   {"unknown model 'hln3d'", "hln2d-so"});
  expect_bad_input(lphi_run({"fit", "-", "--model", "wire1d"}, sweep), {"--width-m"});
  expect_bad_input(lphi_run({"fit", "-", "--model", "kawabata3d"}, sweep), {"--thickness-m"});
  expect_bad_input(lphi_run({"fit", "-", "--squares", "-3"}, sweep),
                   {"--squares must be a positive number"});
  expect_bad_input(lphi_run({"fit", "-", "--spin-orbit"}, sweep), {"--spin-orbit", "wire1d"});
}

TEST(LphiDephasingBadInput, NegativeTemperature) {
  expect_bad_input(
      lphi_run({"dephasing", "-"},
               "temperature_k,lphi_m,lphi_err_m\n0.1,1e-6,3e-8\n-0.2,9e-7,3e-8\n0.3,8e-7,3e-8\n"),
      {"line 3, column 'temperature_k'", "must be positive", "-0.2"});
}

TEST(LphiDephasingBadInput, MissingColumnNonNumericAndTooFew) {
  expect_bad_input(lphi_run({"dephasing", "-"}, "temperature_k,lphi_m\n0.1,1e-6\n"),
                   {"missing column 'lphi_err_m'"});
  expect_bad_input(
      lphi_run({"dephasing", "-"}, "temperature_k,lphi_m,lphi_err_m\n0.1,1e-6,3e-8\n0.2,,3e-8\n"),
      {"line 3, column 'lphi_m'", "is empty"});
  expect_bad_input(
      lphi_run({"dephasing", "-"},
               "temperature_k,lphi_m,lphi_err_m\n0.1,1e-6,3e-8\n0.2,9e-7,3e-8\n0.4,8e-7,3e-8\n"),
      {"too few points", "3 temperatures"});
  expect_bad_input(lphi_run({"dephasing", "-", "--dimension", "4"},
                            "temperature_k,lphi_m,lphi_err_m\n"),
                   {"--dimension must be 1, 2 or 3"});
}

TEST(LphiSynthBadInput, RequiredAndInconsistentOptions) {
  EXPECT_EQ(lphi_run({"synth", "sweep"}).exit_code, lphi::client::exit_bad_input);
  expect_bad_input(lphi_run({"synth", "sweep", "--lphi-m", "-1"}),
                   {"--lphi-m must be a positive number"});
  expect_bad_input(lphi_run({"synth", "sweep", "--lphi-m", "2e-7", "--squares", "5"}),
                   {"--squares and --current go together"});
  expect_bad_input(lphi_run({"synth", "dephasing", "--lphi-1k-m", "5e-7", "--t-min-k", "2"}),
                   {"--t-max-k", "must exceed --t-min-k"});
}

// ------------------------------------------------------------- help, version

TEST(LphiProgram, VersionIsTheProjectVersion) {
  const ProgramResult r = lphi_run({"--version"});
  EXPECT_EQ(r.exit_code, 0);
  EXPECT_THAT(r.out, HasSubstr(LPHI_PROJECT_VERSION));
}

TEST(LphiProgram, HelpDescribesCommandsAndOptions) {
  const ProgramResult top = lphi_run({"--help"});
  EXPECT_EQ(top.exit_code, 0);
  for (const char* word : {"fit", "dephasing", "synth"}) EXPECT_THAT(top.out, HasSubstr(word));
  const ProgramResult fit = lphi_run({"fit", "--help"});
  EXPECT_EQ(fit.exit_code, 0);
  for (const char* word : {"--model", "--squares", "--current", "lockin_x_v", "--json"}) {
    EXPECT_THAT(fit.out, HasSubstr(word));
  }
}

TEST(LphiProgram, NoCommandIsAUsageError) {
  const ProgramResult r = lphi_run({});
  EXPECT_EQ(r.exit_code, lphi::client::exit_bad_input);
  EXPECT_FALSE(r.err.empty());
}

}  // namespace
