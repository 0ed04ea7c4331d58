// daemon/client/column_map.hpp and table_checks.hpp: the unit table against
// the SI prefixes, the --column parser, reading a mapped column in SI, and
// the file-level checks that refuse a value beyond the reading limits with
// the unit it was likely written in.
//
// Sources: the SI prefixes are those of the SI Brochure (BIPM, 9th edition,
// 2019, table 7: n = 1e-9, u = 1e-6, m = 1e-3, k = 1e3, M = 1e6); the minute
// is 60 s (same brochure, table 8); the gauss is 1e-4 T (SI Brochure, 8th
// edition, 2006, table 9, CGS units). Factors are compared exactly: each is
// the double nearest a power of ten, written as a literal here and there.
#include <gmock/gmock.h>
#include <gtest/gtest.h>

#include <cmath>
#include <map>
#include <sstream>
#include <string>
#include <vector>

#include "daemon/client/column_map.hpp"
#include "daemon/client/table_checks.hpp"

namespace lphi::client {
namespace {

using ::testing::HasSubstr;
using ::testing::Not;

TEST(UnitTable, EveryFactorIsAnSiPrefixOrANamedNonSiUnit) {
  const std::map<std::string, double> si_prefix = {
      {"n", 1e-9}, {"u", 1e-6}, {"m", 1e-3}, {"k", 1e3}, {"M", 1e6}};
  const std::map<std::string, double> non_si = {{"G", 1e-4}, {"min", 60.0}};
  std::size_t checked = 0;
  for (const Unit& u : unit_table()) {
    SCOPED_TRACE(std::string(u.name));
    const std::string name(u.name);
    const std::string si(si_unit(u.quantity));
    if (non_si.count(name) != 0) {
      EXPECT_EQ(u.to_si, non_si.at(name));
    } else if (name == si) {
      EXPECT_EQ(u.to_si, 1.0);
    } else {
      // A prefixed SI unit: prefix + the SI unit's symbol.
      ASSERT_GT(name.size(), si.size());
      ASSERT_EQ(name.substr(name.size() - si.size()), si);
      const std::string prefix = name.substr(0, name.size() - si.size());
      ASSERT_EQ(si_prefix.count(prefix), 1u) << "not an SI prefix: " << prefix;
      EXPECT_EQ(u.to_si, si_prefix.at(prefix));
    }
    ++checked;
  }
  // The units the issue lists: T, mT, uT, G; ohm, kohm, Mohm; K, mK; V, mV,
  // uV; m, um, nm; s, ms, min.
  EXPECT_EQ(checked, 18u);
  for (const char* name : {"T", "mT", "uT", "G", "ohm", "kohm", "Mohm", "K", "mK", "V", "mV", "uV",
                           "m", "um", "nm", "s", "ms", "min"}) {
    EXPECT_TRUE(find_unit(name).has_value()) << name;
  }
}

TEST(UnitTable, SiUnitsAreTheSuffixesOfLphisColumnNames) {
  EXPECT_EQ(quantity_of_column("field_t"), Quantity::field);
  EXPECT_EQ(quantity_of_column("rsq_ohm"), Quantity::resistance);
  EXPECT_EQ(quantity_of_column("temperature_k"), Quantity::temperature);
  EXPECT_EQ(quantity_of_column("lockin_x_v"), Quantity::voltage);
  EXPECT_EQ(quantity_of_column("lphi_err_m"), Quantity::length);
  EXPECT_EQ(quantity_of_column("lockin_time_constant_s"), Quantity::time);
  EXPECT_EQ(quantity_of_column("t"), Quantity::time);
  EXPECT_FALSE(quantity_of_column("seq").has_value());
  EXPECT_FALSE(quantity_of_column("lockin_overload").has_value());
  EXPECT_FALSE(quantity_of_column("frequency_hz").has_value());
  EXPECT_EQ(unit_list(Quantity::field), "T, mT, uT, G");
  EXPECT_EQ(unit_list(Quantity::resistance), "ohm, kohm, Mohm");
}

TEST(UnitTable, CaseMattersAndTheMicroSignIsU) {
  ASSERT_TRUE(find_unit("\xC2\xB5T").has_value());  // U+00B5 MICRO SIGN
  EXPECT_EQ(find_unit("\xC2\xB5T")->to_si, 1e-6);
  EXPECT_FALSE(find_unit("MT").has_value());  // not a millitesla
  EXPECT_FALSE(find_unit("mt").has_value());
  EXPECT_FALSE(find_unit("Ohm").has_value());
  EXPECT_EQ(find_unit("Mohm")->to_si, 1e6);
  EXPECT_EQ(find_unit("mohm"), std::nullopt);
}

const std::vector<std::string>& sweep_cols() { return fit_columns(); }

TEST(ColumnMapParser, AcceptsTheThreeFormsAndConverts) {
  ColumnMap map;
  ASSERT_TRUE(map.add("field_t=B:mT", sweep_cols(), "a sweep table").ok());
  ASSERT_TRUE(map.add(" rsq_ohm = R (sheet) : kohm ", sweep_cols(), "a sweep table").ok());
  ASSERT_TRUE(map.add("lockin_x_v:uV", sweep_cols(), "a sweep table").ok());
  ASSERT_TRUE(map.add("r_ohm=R4", sweep_cols(), "a sweep table").ok());
  EXPECT_EQ(map.file_name("field_t"), "B");
  EXPECT_EQ(map.to_si("field_t"), 1e-3);
  EXPECT_EQ(map.unit("field_t"), "mT");
  EXPECT_EQ(map.describe("field_t"), "'B' (field_t in mT)");
  EXPECT_EQ(map.file_name("rsq_ohm"), "R (sheet)");
  EXPECT_EQ(map.to_si("rsq_ohm"), 1e3);
  EXPECT_EQ(map.file_name("lockin_x_v"), "lockin_x_v");
  EXPECT_EQ(map.describe("lockin_x_v"), "'lockin_x_v' (in uV)");
  EXPECT_EQ(map.to_si("r_ohm"), 1.0);
  EXPECT_EQ(map.describe("r_ohm"), "'R4' (r_ohm)");
  ColumnMap none;
  EXPECT_EQ(none.describe("field_t"), "'field_t'");
  EXPECT_EQ(none.to_si("field_t"), 1.0);
}

TEST(ColumnMapParser, RefusalsNameTheProblemAndListWhatIsAccepted) {
  auto refusal = [](const std::string& mapping) {
    ColumnMap map;
    return map.add(mapping, sweep_cols(), "a sweep table").message();
  };
  EXPECT_THAT(refusal("field_t=B:furlong"),
              HasSubstr("--column 'field_t=B:furlong': unknown unit 'furlong'; field_t is a field: "
                        "use T, mT, uT, G"));
  EXPECT_THAT(refusal("field_t=B:kohm"),
              HasSubstr("'kohm' is a unit of resistance; field_t is a field: use T, mT, uT, G"));
  EXPECT_THAT(refusal("rsq_ohm=R:MT"), HasSubstr("unknown unit 'MT'; rsq_ohm is a resistance: use ohm, kohm, Mohm"));
  EXPECT_THAT(refusal("b_field=B:mT"),
              HasSubstr("'b_field' is not a column of a sweep table (field_t, rsq_ohm, r_ohm, lockin_x_v, t_s, "
                        "time_constant_s)"));
  EXPECT_THAT(refusal("field_t=B:"), HasSubstr("no unit after ':'"));
  EXPECT_THAT(refusal("field_t"), HasSubstr("expected COLUMN=NAME, COLUMN=NAME:UNIT or COLUMN:UNIT"));
  EXPECT_THAT(refusal("field_t="), HasSubstr("expected COLUMN=NAME"));
  EXPECT_THAT(refusal("field_t= :mT"), HasSubstr("the file's column name is empty"));
  ColumnMap twice;
  ASSERT_TRUE(twice.add("field_t=B", sweep_cols(), "a sweep table").ok());
  EXPECT_THAT(twice.add("field_t:mT", sweep_cols(), "a sweep table").message(), HasSubstr("mapped twice"));
  ColumnMap flags;
  EXPECT_THAT(flags.add("lockin_overload=O:V", {"lockin_overload"}, "a recording").message(),
              HasSubstr("'lockin_overload' has no unit to convert"));
}

CsvTable parse_table(const std::string& text) {
  CsvTable t;
  EXPECT_TRUE(CsvTable::parse(text, "s.csv", t).ok());
  return t;
}

TEST(ReadSiColumn, ConvertsByTheStatedUnitAndNamesTheFilesColumn) {
  const CsvTable t = parse_table("B,R\n-20,1.5\n0,1.25\n12.5,1.5\n");
  ColumnMap map;
  ASSERT_TRUE(map.add("field_t=B:mT", sweep_cols(), "a sweep table").ok());
  ASSERT_TRUE(map.add("rsq_ohm=R:kohm", sweep_cols(), "a sweep table").ok());
  std::vector<double> b, r;
  ASSERT_TRUE(read_si_column(t, map, "field_t", b).ok());
  ASSERT_TRUE(read_si_column(t, map, "rsq_ohm", r).ok());
  // 1 mT = 1e-3 T and 1 kohm = 1e3 ohm (SI Brochure, table 7).
  EXPECT_EQ(b, (std::vector<double>{-20 * 1e-3, 0.0, 12.5 * 1e-3}));
  EXPECT_EQ(r, (std::vector<double>{1500.0, 1250.0, 1500.0}));
  EXPECT_TRUE(has_mapped_column(t, map, "rsq_ohm"));
  EXPECT_FALSE(has_mapped_column(t, map, "r_ohm"));

  const CsvTable bad = parse_table("B,R\n-20,1.5\n0,x\n");
  EXPECT_THAT(read_si_column(bad, map, "rsq_ohm", r).message(),
              HasSubstr("s.csv line 3, column 'R' (rsq_ohm in kohm): 'x' is not a number"));
  ColumnMap none;
  EXPECT_THAT(read_si_column(t, none, "field_t", b).message(),
              HasSubstr("s.csv: missing column 'field_t' (the header has: B, R); map the file's name "
                        "with --column field_t=NAME[:UNIT] (UNIT one of T, mT, uT, G)"));
  ColumnMap wrong;
  ASSERT_TRUE(wrong.add("field_t=Bfield", sweep_cols(), "a sweep table").ok());
  EXPECT_THAT(read_si_column(t, wrong, "field_t", b).message(),
              HasSubstr("missing column 'Bfield' (given for field_t by --column)"));
}

TEST(SweepUnits, AFieldBeyondTheLimitIsRefusedAtItsLargestValueWithTheMappingThatReadsIt) {
  const CsvTable t = parse_table("B,rsq_ohm\n-45,1000\n0,999\n40,1000\n");
  std::vector<double> b = {-45.0, 0.0, 40.0}, r = {1000.0, 999.0, 1000.0};
  ColumnMap renamed;
  ASSERT_TRUE(renamed.add("field_t=B", sweep_cols(), "a sweep table").ok());
  std::ostringstream warn;
  const auto s = check_sweep_units(t, renamed, b, "rsq_ohm", r, 1.0, warn);
  ASSERT_FALSE(s.ok());
  EXPECT_THAT(s.message(),
              HasSubstr("s.csv line 2, column 'B' (field_t): -45 T is beyond the 30 T lphi accepts in "
                        "magnitude: is it in mT? -45 mT would be -0.045 T; map it with --column "
                        "field_t=B:mT (2 rows are beyond the limit)"));
  // With a unit given, the message says how the value was read instead.
  ColumnMap in_mt;
  ASSERT_TRUE(in_mt.add("field_t=B:mT", sweep_cols(), "a sweep table").ok());
  const std::vector<double> b_si = {-45.0, 0.0, 0.04};
  EXPECT_THAT(check_sweep_units(t, in_mt, b_si, "rsq_ohm", r, 1.0, warn).message(),
              HasSubstr("-45 T is beyond the 30 T lphi accepts in magnitude (read as -45000 mT)"));
  // Within the limit: nothing to say.
  const std::vector<double> ok = {-0.045, 0.0, 0.04};
  EXPECT_TRUE(check_sweep_units(t, renamed, ok, "rsq_ohm", r, 1.0, warn).ok());
  EXPECT_EQ(warn.str(), "");
}

TEST(SweepUnits, ASheetResistanceAboveHOverE2IsQuestionedOnlyWhenTheUserGaveAUnit) {
  // R_K = h/e^2 = 25812.80745 ohm (CODATA 2018, exact h and e). A 1000-ohm
  // film whose column is read as kohm gives 1e6 ohm, far above it; a
  // 20-ohm film read so gives 20 kohm, below it (not flagged).
  const CsvTable t = parse_table("field_t,R\n-0.01,1000\n0,999\n0.01,1000\n");
  const std::vector<double> b = {-0.01, 0.0, 0.01};
  const std::vector<double> r_as_kohm = {1e6, 0.999e6, 1e6};
  ColumnMap kohm;
  ASSERT_TRUE(kohm.add("rsq_ohm=R:kohm", sweep_cols(), "a sweep table").ok());
  std::ostringstream warn;
  EXPECT_TRUE(check_sweep_units(t, kohm, b, "rsq_ohm", r_as_kohm, 1.0, warn).ok());
  EXPECT_THAT(warn.str(), HasSubstr("warning: s.csv column 'R' (rsq_ohm in kohm): the median sheet "
                                    "resistance is 1e+06 ohm as read in kohm, at or above h/e^2 = "
                                    "2.581e+04 ohm"));
  EXPECT_THAT(warn.str(), HasSubstr("is the column in ohm? (map it with --column rsq_ohm=R)"));
  std::ostringstream below;
  EXPECT_TRUE(check_sweep_units(t, kohm, b, "rsq_ohm", {2e4, 2e4, 2e4}, 1.0, below).ok());
  EXPECT_EQ(below.str(), "");
  // r_ohm over 100 squares: 1e6 ohm is 1e4 ohm per square, below R_K.
  ColumnMap r_kohm;
  ASSERT_TRUE(r_kohm.add("r_ohm=R:kohm", sweep_cols(), "a sweep table").ok());
  std::ostringstream per_square;
  EXPECT_TRUE(check_sweep_units(t, r_kohm, b, "r_ohm", r_as_kohm, 100.0, per_square).ok());
  EXPECT_EQ(per_square.str(), "");
  // The same numbers without a stated unit are taken as ohm: no guess.
  ColumnMap plain;
  ASSERT_TRUE(plain.add("rsq_ohm=R", sweep_cols(), "a sweep table").ok());
  std::ostringstream quiet;
  EXPECT_TRUE(check_sweep_units(t, plain, b, "rsq_ohm", r_as_kohm, 1.0, quiet).ok());
  EXPECT_EQ(quiet.str(), "");
}

TEST(DephasingUnits, TemperatureAndLengthBeyondTheirBoundsGetAUnitHint) {
  const CsvTable t = parse_table("T,L,dL\n20,350,10\n1500,300,10\n");
  ColumnMap map;
  ASSERT_TRUE(map.add("temperature_k=T", dephasing_columns(), "an L_phi(T) table").ok());
  ASSERT_TRUE(map.add("lphi_m=L", dephasing_columns(), "an L_phi(T) table").ok());
  ASSERT_TRUE(map.add("lphi_err_m=dL", dephasing_columns(), "an L_phi(T) table").ok());
  EXPECT_THAT(check_dephasing_units(t, map, {0.02, 1500.0}, {350e-9, 300e-9}, {1e-8, 1e-8}).message(),
              HasSubstr("s.csv line 3, column 'T' (temperature_k): 1500 K is outside (0, 1000) K: is it "
                        "in mK? 1500 mK would be 1.5 K; map it with --column temperature_k=T:mK"));
  EXPECT_THAT(check_dephasing_units(t, map, {0.02, 0.03}, {350.0, 300.0}, {10.0, 10.0}).message(),
              HasSubstr("s.csv line 2, column 'L' (lphi_m): 350 m is no phase-coherence length (lphi "
                        "takes lphi_m below 0.001 m): is it in nm or um? map it with --column "
                        "lphi_m=L:nm (or :um)"));
  EXPECT_TRUE(check_dephasing_units(t, map, {0.02, 0.03}, {350e-9, 300e-9}, {1e-8, 1e-8}).ok());
  EXPECT_THAT(check_dephasing_units(t, map, {0.02, 0.03}, {350e-9, 300e-9}, {1e-8, 2e-3}).message(),
              HasSubstr("line 3, column 'dL' (lphi_err_m): 0.002 m is no phase-coherence length"));
  EXPECT_THAT(check_dephasing_units(t, map, {0.02, 0.03}, {350e-9, 300e-9}, {1e-8, 2e-3}).message(),
              Not(HasSubstr("read as")));
}

}  // namespace
}  // namespace lphi::client
