// Units at the edges of the built lphi program: a sweep or an L_phi(T)
// table written in other units and read with --column gives the same result
// as the SI table it was made from; a table in other units read without a
// mapping is refused with the unit it was likely in; a file in another
// delimiter says which one it found.
//
// The tables in other units are the SI tables of `lphi synth` rescaled here
// by powers of ten (SI Brochure, 9th ed., table 7: 1 mT = 1e-3 T, 1 kohm =
// 1e3 ohm, 1 mK = 1e-3 K, 1 nm = 1e-9 m) and printed with 17 significant
// digits, so the values lphi reads back differ from the SI ones by at most a
// rounding of the last bit; the fits must then agree to 1e-6 relative, the
// tolerance the noise-free round trips of end_to_end_test.cpp use.
#include <cmath>
#include <sstream>
#include <string>
#include <vector>

#include <gmock/gmock.h>
#include <gtest/gtest.h>
#include <nlohmann/json.hpp>

#include "daemon/client/exit_codes.hpp"
#include "tests/support/run_program.hpp"

namespace {

using lphi::testing::ProgramResult;
using lphi::testing::TempDir;
using ::testing::HasSubstr;
using nlohmann::json;

ProgramResult lphi_units_run(const std::vector<std::string>& args, const std::string& stdin_text = "") {
  return lphi::testing::run_program(LPHI_CLI_PROGRAM, args, stdin_text);
}

json lphi_units_json(const std::vector<std::string>& args, const std::string& stdin_text = "") {
  const ProgramResult r = lphi_units_run(args, stdin_text);
  EXPECT_EQ(r.exit_code, 0) << "stderr: " << r.err;
  try {
    return json::parse(r.out);
  } catch (const json::exception& e) {
    ADD_FAILURE() << "not JSON: " << e.what() << "\nstdout: " << r.out << "\nstderr: " << r.err;
    return json::object();
  }
}

// Rewrites a comma-separated table of numbers: new header, column i scaled
// by factor[i]. Read with the standard library, not lphi's reader.
std::string rescaled(const std::string& table, const std::string& header,
                     const std::vector<double>& factor) {
  std::istringstream in(table);
  std::string line;
  std::getline(in, line);  // the SI header
  std::ostringstream out;
  out.precision(17);
  out << header << '\n';
  while (std::getline(in, line)) {
    if (line.empty()) continue;
    std::istringstream cells(line);
    std::size_t i = 0;
    for (std::string cell; std::getline(cells, cell, ','); ++i) {
      out << (i == 0 ? "" : ",") << std::stod(cell) * factor.at(i);
    }
    out << '\n';
  }
  return out.str();
}

double relative(double value, double truth) { return std::fabs(value - truth) / std::fabs(truth); }

void expect_bad_input_units(const ProgramResult& r, const std::vector<std::string>& mentions) {
  EXPECT_EQ(r.exit_code, lphi::client::exit_bad_input) << "stderr: " << r.err;
  EXPECT_TRUE(r.out.empty()) << "stdout: " << r.out;
  for (const auto& m : mentions) EXPECT_THAT(r.err, HasSubstr(m));
}

TEST(LphiUnits, FitOfASweepInMilliteslaAndKiloohmMatchesTheSiSweep) {
  TempDir dir;
  // Noisy, so that the fit has errors and alpha is fitted: 300 nm, +-40 mT.
  const ProgramResult synth = lphi_units_run({"synth", "sweep", "--lphi-m", "300e-9",
                                              "--max-field-t", "0.04", "--noise-rsq-ohm", "0.02",
                                              "--seed", "13"});
  ASSERT_EQ(synth.exit_code, 0) << synth.err;
  const std::string si = dir.write("si.csv", synth.out);
  const std::string lab = dir.write("lab.csv", rescaled(synth.out, "B (mT),R_sq (kohm)", {1e3, 1e-3}));

  const json want = lphi_units_json({"fit", si, "--json"});
  const json got = lphi_units_json(
      {"fit", lab, "--column", "field_t=B (mT):mT", "--column", "rsq_ohm=R_sq (kohm):kohm", "--json"});
  for (const char* key : {"lphi_m", "lphi_err_m", "alpha", "b_phi_t", "rsq0_ohm"}) {
    ASSERT_TRUE(want[key].is_number() && got[key].is_number()) << key << got.dump();
    EXPECT_LT(relative(got[key].get<double>(), want[key].get<double>()), 1e-6)
        << key << ": " << got[key] << " vs " << want[key];
  }
  // And the SI result itself is the truth within 3 of its errors (the
  // round trip of end_to_end_test.cpp), so the mapped one is too.
  EXPECT_LT(std::fabs(want["lphi_m"].get<double>() - 300e-9), 3.0 * want["lphi_err_m"].get<double>());

  // The same file under lphi's names but without units: the field is
  // refused at its largest value, with the mapping that reads it.
  const std::string unmapped = dir.write("unmapped.csv", rescaled(synth.out, "field_t,rsq_ohm", {1e3, 1.0}));
  expect_bad_input_units(lphi_units_run({"fit", unmapped}),
                         {"unmapped.csv line 2, column 'field_t': -40 T is beyond the 30 T lphi accepts in "
                          "magnitude: is it in mT? -40 mT would be -0.04 T; map it with --column "
                          "field_t=field_t:mT"});
  // The short form COLUMN:UNIT reads it.
  const json short_form = lphi_units_json({"fit", unmapped, "--column", "field_t:mT", "--json"});
  EXPECT_LT(relative(short_form["lphi_m"].get<double>(), want["lphi_m"].get<double>()), 1e-6);
}

TEST(LphiUnits, ResistanceInKiloohmReadAsOhmIsNotRescaledSilently) {
  // A kohm column given as ohm is the user's statement: lphi fits it as
  // said. Given as kohm while it was ohm, the warning asks.
  TempDir dir;
  const ProgramResult synth =
      lphi_units_run({"synth", "sweep", "--lphi-m", "300e-9", "--max-field-t", "0.04"});
  ASSERT_EQ(synth.exit_code, 0) << synth.err;
  const std::string ohm = dir.write("ohm.csv", rescaled(synth.out, "field_t,R", {1.0, 1.0}));
  const ProgramResult r =
      lphi_units_run({"fit", ohm, "--column", "rsq_ohm=R:kohm", "--json"});
  EXPECT_THAT(r.err, HasSubstr("lphi fit: warning: " + ohm +
                               " column 'R' (rsq_ohm in kohm): the median sheet resistance is "));
  EXPECT_THAT(r.err, HasSubstr("ohm as read in kohm, at or above h/e^2"));
  EXPECT_THAT(r.err, HasSubstr("is the column in ohm? (map it with --column rsq_ohm=R)"));
}

TEST(LphiUnits, DephasingTableInMillikelvinAndNanometresMatchesTheSiTable) {
  TempDir dir;
  const ProgramResult synth = lphi_units_run({"synth", "dephasing", "--lphi-1k-m", "500e-9", "--p",
                                              "1", "--t-sat-k", "0.1", "--seed", "5"});
  ASSERT_EQ(synth.exit_code, 0) << synth.err;
  const std::string si = dir.write("si.csv", synth.out);
  const std::string lab = dir.write("lab.csv", rescaled(synth.out, "T_mK,Lphi_nm,dLphi_nm", {1e3, 1e9, 1e9}));
  const json want = lphi_units_json({"dephasing", si, "--json"});
  const json got = lphi_units_json({"dephasing", lab, "--column", "temperature_k=T_mK:mK", "--column",
                                    "lphi_m=Lphi_nm:nm", "--column", "lphi_err_m=dLphi_nm:nm", "--json"});
  EXPECT_EQ(got["state"], want["state"]);
  for (const char* key : {"exponent_p", "t_sat_k", "lphi_sat_m"}) {
    ASSERT_TRUE(want[key].is_number() && got[key].is_number()) << key << got.dump();
    EXPECT_LT(relative(got[key].get<double>(), want[key].get<double>()), 1e-6) << key;
  }
  // Without the mapping of L_phi, 350-ish "m" is refused with the hint.
  expect_bad_input_units(
      lphi_units_run({"dephasing", lab, "--column", "temperature_k=T_mK:mK", "--column", "lphi_m=Lphi_nm",
                      "--column", "lphi_err_m=dLphi_nm"}),
      {"column 'Lphi_nm' (lphi_m):", "is no phase-coherence length", "is it in nm or um? map it with "
       "--column lphi_m=Lphi_nm:nm"});
  // Without the mapping of T, the first temperature above 1000 "K".
  expect_bad_input_units(
      lphi_units_run({"dephasing", lab, "--column", "temperature_k=T_mK", "--column", "lphi_m=Lphi_nm:nm",
                      "--column", "lphi_err_m=dLphi_nm:nm"}),
      {"column 'T_mK' (temperature_k):", "K is outside (0, 1000) K: is it in mK?",
       "map it with --column temperature_k=T_mK:mK"});
}

TEST(LphiUnits, UnknownUnitsAndColumnsAreRefusedListingTheAcceptedOnes) {
  const std::string sweep = "field_t,rsq_ohm\n-0.01,1000\n0,999\n0.01,1000\n";
  expect_bad_input_units(lphi_units_run({"fit", "-", "--column", "field_t:Oe"}, sweep),
                         {"--column 'field_t:Oe': unknown unit 'Oe'; field_t is a field: use T, mT, uT, G"});
  expect_bad_input_units(lphi_units_run({"fit", "-", "--column", "rsq_ohm=R:mT"}, sweep),
                         {"'mT' is a unit of field; rsq_ohm is a resistance: use ohm, kohm, Mohm"});
  expect_bad_input_units(lphi_units_run({"fit", "-", "--column", "b=B:mT"}, sweep),
                         {"'b' is not a column of a sweep table (field_t, rsq_ohm, r_ohm, lockin_x_v, t_s, time_constant_s)"});
  expect_bad_input_units(lphi_units_run({"dephasing", "-", "--column", "lphi_m=L:furlong"},
                                        "temperature_k,L,lphi_err_m\n"),
                         {"unknown unit 'furlong'; lphi_m is a length: use m, um, nm"});
  // A mapped column that the file lacks names both names and the header.
  expect_bad_input_units(lphi_units_run({"fit", "-", "--column", "field_t=B:mT"}, sweep),
                         {"stdin: missing column 'B' (given for field_t by --column) (the header has: "
                          "field_t, rsq_ohm)"});
}

TEST(LphiUnits, ASemicolonOrTabFileSaysWhichDelimiterItFound) {
  expect_bad_input_units(lphi_units_run({"fit", "-"}, "field_t;rsq_ohm\n-0,01;1000\n0;999\n"),
                         {"stdin line 1 looks ';'-separated ('field_t', 'rsq_ohm'); lphi reads "
                          "comma-separated files"});
  expect_bad_input_units(lphi_units_run({"dephasing", "-"}, "temperature_k\tlphi_m\tlphi_err_m\n"),
                         {"stdin line 1 looks tab-separated ('temperature_k', 'lphi_m', 'lphi_err_m')"});
  // A comma header over semicolon rows: the row is named with its delimiter.
  expect_bad_input_units(lphi_units_run({"fit", "-"}, "field_t,rsq_ohm\n-0.01;1000\n"),
                         {"stdin line 2: row has 1 cell, the header has 2 columns (the line looks "
                          "';'-separated; lphi reads comma-separated files)"});
}

TEST(LphiUnits, HelpDocumentsTheColumnOption) {
  for (const char* command : {"fit", "dephasing", "replay", "send"}) {
    const ProgramResult r = lphi_units_run({command, "--help"});
    EXPECT_EQ(r.exit_code, 0) << command;
    EXPECT_THAT(r.out, HasSubstr("--column")) << command;
    EXPECT_THAT(r.out, HasSubstr("field_t=B:mT")) << command;
  }
}

}  // namespace
