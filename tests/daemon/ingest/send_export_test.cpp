// lphi send and lphi export against the real lphid over ipc:// sockets:
// what goes in comes out, value by value.
#include <gtest/gtest.h>

#include <cmath>
#include <fstream>
#include <iomanip>
#include <sstream>
#include <thread>

#include "schema/protocol/codec.hpp"
#include "tests/support/daemon_process.hpp"
#include "tests/support/temp_dir.hpp"

namespace lphi::testing {
namespace {

using nlohmann::json;

struct Instance {
  TempDir dir;
  std::string config = dir.file("lphid-test.toml");
  DaemonProcess daemon{dir.path(), config};
  Instance() {
    std::ofstream(config) << test_config();
  }
  RunResult lphi(std::vector<std::string> args, const std::string& stdin_path = "") {
    args.insert(args.begin(), LPHI_PATH);
    args.push_back("--data-dir");
    args.push_back(dir.path());
    return run_program(args, stdin_path, std::chrono::seconds(90));
  }
};

std::vector<json> lockin_lines(int n) {
  std::vector<json> v;
  for (int i = 1; i <= n; ++i) {
    json r = {{"seq", i}, {"t", 1.7e9 + 0.05 * i + 1.0 / 3.0}, {"x_v", 1e-6 * std::sin(i)}, {"y_v", -1e-9 / i}};
    if (i % 2 == 0) r["frequency_hz"] = 17.77;
    if (i % 5 == 0) r["overload"] = true;
    if (i % 7 == 0) r["time_constant_s"] = 0.3;
    v.push_back(r);
  }
  return v;
}

std::string write_lines(const std::string& path, const std::vector<json>& lines) {
  std::ofstream out(path);
  for (const auto& l : lines) out << l.dump() << "\n";
  return path;
}

std::vector<json> parse_lines(const std::string& text) {
  std::vector<json> v;
  std::istringstream in(text);
  std::string line;
  while (std::getline(in, line)) {
    if (!line.empty()) v.push_back(json::parse(line));
  }
  return v;
}

TEST(SendExport, JsonLinesRoundTripValueByValueAndResendsAreDuplicates) {
  Instance inst;
  ASSERT_TRUE(inst.daemon.start());
  const auto sent = lockin_lines(3000);
  const auto file = write_lines(inst.dir.file("in.jsonl"), sent);
  auto r = inst.lphi({"send", "--source", "lockin-a", "--timeout", "60"}, file);
  EXPECT_EQ(r.exit_code, 0) << r.err;
  EXPECT_NE(r.out.find("accepted 3000, duplicates 0, rejected 0"), std::string::npos) << r.out;

  auto e = inst.lphi({"export", "readings", "--source", "lockin-a", "--format", "jsonl"});
  ASSERT_EQ(e.exit_code, 0) << e.err;
  const auto got = parse_lines(e.out);
  ASSERT_EQ(got.size(), sent.size());
  // JSON numbers are written with enough digits to read back the same
  // double (nlohmann's dump), so equality here is exact.
  for (std::size_t i = 0; i < sent.size(); ++i) EXPECT_EQ(got[i], sent[i]) << "line " << i;

  // The same file again: every reading is a duplicate, nothing changes.
  auto again = inst.lphi({"send", "--source", "lockin-a", "--encoding", "json", "--timeout", "60"}, file);
  EXPECT_EQ(again.exit_code, 0) << again.err;
  EXPECT_NE(again.out.find("accepted 0, duplicates 3000, rejected 0"), std::string::npos) << again.out;

  // A time window selects by t.
  auto w = inst.lphi({"export", "readings", "--source", "lockin-a", "--format", "jsonl", "--from",
                      "1700000010.3", "--to", "1700000020.3"});
  ASSERT_EQ(w.exit_code, 0) << w.err;
  const auto window = parse_lines(w.out);
  ASSERT_FALSE(window.empty());
  for (const auto& j : window) {
    EXPECT_GE(j["t"].get<double>(), 1700000010.3);
    EXPECT_LE(j["t"].get<double>(), 1700000020.3);
  }
  // seq 200 has t = 1.7e9 + 10 + 1/3; seq 399 has 1.7e9 + 19.95 + 1/3.
  EXPECT_EQ(window.front()["seq"], 200);
  EXPECT_EQ(window.back()["seq"], 399);

  auto s = inst.lphi({"status", "--json"});
  ASSERT_EQ(s.exit_code, 0) << s.err;
  const auto status = json::parse(s.out);
  EXPECT_EQ(status["counters"]["accepted"], 3000);
  EXPECT_EQ(status["counters"]["duplicates"], 3000);
  EXPECT_EQ(inst.daemon.stop(), 0);
}

TEST(SendExport, CsvWithoutSeqGetsSeqAssignedAndRejectionsFailTheRun) {
  Instance inst;
  ASSERT_TRUE(inst.daemon.start());
  {
    std::ofstream out(inst.dir.file("in.csv"));
    out << "t,temperature_k,resistance_ohm\n";
    for (int i = 0; i < 500; ++i) out << 1.7e9 + i << "," << 0.01 + 1e-4 * i << "," << 1000 + i << "\n";
    out << 1.7e9 + 500 << ",-0.5,1000\n";  // a negative temperature
  }
  auto r = inst.lphi({"send", "--source", "mxc", "--format", "csv", "--timeout", "60"}, inst.dir.file("in.csv"));
  EXPECT_EQ(r.exit_code, 1) << r.err;  // exit_failure: something was rejected
  EXPECT_NE(r.out.find("accepted 500, duplicates 0, rejected 1"), std::string::npos) << r.out;
  EXPECT_NE(r.err.find("temperature_out_of_range"), std::string::npos) << r.err;

  auto e = inst.lphi({"export", "readings", "--source", "mxc"});
  ASSERT_EQ(e.exit_code, 0) << e.err;
  std::istringstream in(e.out);
  std::string line;
  std::getline(in, line);
  EXPECT_EQ(line, "seq,t,temperature_k,resistance_ohm");
  int n = 0;
  while (std::getline(in, line)) {
    double t = 0, temp = 0, res = 0;
    long long seq = -1;
    ASSERT_EQ(std::sscanf(line.c_str(), "%lld,%lf,%lf,%lf", &seq, &t, &temp, &res), 4) << line;
    EXPECT_EQ(seq, n);  // a new source's seqs start at 0
    // The CSV was written with the stream's default 6 significant digits,
    // so compare against the same rounding of the values sent.
    std::ostringstream expect;
    expect << 1.7e9 + n << "," << 0.01 + 1e-4 * n << "," << 1000 + n;
    std::ostringstream have;
    have << t << "," << temp << "," << res;
    EXPECT_EQ(have.str(), expect.str());
    ++n;
  }
  EXPECT_EQ(n, 500);
  EXPECT_EQ(inst.daemon.stop(), 0);
}

// A magnet's field written in mT: `lphi send` refuses 45 "T" with the
// unit it was likely in and the mapping that reads it, exits non-zero, and
// sends nothing of that reading; with --column field_t=B:mT the same
// numbers arrive as tesla (1 mT = 1e-3 T, SI Brochure, 9th ed., table 7).
TEST(SendExport, AFieldInMilliteslaIsRefusedWithAUnitHintAndReadWithAColumnMapping) {
  Instance inst;
  ASSERT_TRUE(inst.daemon.start());
  write_lines(inst.dir.file("mt.jsonl"), {json{{"t", 1.7e9 + 1.0}, {"field_t", 0.01}},
                                          json{{"t", 1.7e9 + 2.0}, {"field_t", 45.0}},
                                          json{{"t", 1.7e9 + 3.0}, {"field_t", -0.02}}});
  auto r = inst.lphi({"send", "--source", "magnet", "--timeout", "60"}, inst.dir.file("mt.jsonl"));
  EXPECT_EQ(r.exit_code, 1) << r.err;  // exit_failure: a reading was refused
  EXPECT_NE(r.out.find("accepted 2, duplicates 0, rejected 1"), std::string::npos) << r.out;
  EXPECT_NE(r.err.find("stdin line 2: field_out_of_range: field_t = 45 T is beyond the 30 T lphi accepts "
                       "in magnitude: is it in mT? 45 mT would be 0.045 T (field_t is in tesla); map it "
                       "with --column field_t=field_t:mT"),
            std::string::npos)
      << r.err;

  {
    std::ofstream out(inst.dir.file("mt.csv"));
    out << "t,B\n" << std::setprecision(17);
    for (int i = 0; i < 5; ++i) out << 1.7e9 + 10.0 + i << "," << -40.0 + 20.0 * i << "\n";
  }
  auto m = inst.lphi({"send", "--source", "magnet", "--format", "csv", "--column", "field_t=B:mT",
                      "--timeout", "60"},
                     inst.dir.file("mt.csv"));
  EXPECT_EQ(m.exit_code, 0) << m.err;
  EXPECT_NE(m.out.find("accepted 5, duplicates 0, rejected 0"), std::string::npos) << m.out;

  auto bad_unit = inst.lphi({"send", "--source", "magnet", "--column", "field_t=B:kohm"},
                            inst.dir.file("mt.csv"));
  EXPECT_EQ(bad_unit.exit_code, 2) << bad_unit.err;
  EXPECT_NE(bad_unit.err.find("'kohm' is a unit of resistance; field_t is a field: use T, mT, uT, G"),
            std::string::npos)
      << bad_unit.err;

  auto e = inst.lphi({"export", "readings", "--source", "magnet", "--format", "jsonl"});
  ASSERT_EQ(e.exit_code, 0) << e.err;
  const auto got = parse_lines(e.out);
  ASSERT_EQ(got.size(), 7u) << e.out;
  EXPECT_EQ(got[0]["field_t"], 0.01);
  EXPECT_EQ(got[1]["field_t"], -0.02);
  for (int i = 0; i < 5; ++i) {
    EXPECT_EQ(got[2 + i]["field_t"].get<double>(), (-40.0 + 20.0 * i) * 1e-3) << i;
    EXPECT_LE(std::fabs(got[2 + i]["field_t"].get<double>()), 0.04 + 1e-15);
  }
}

TEST(SendExport, SendWaitsForADaemonThatStartsLater) {
  Instance inst;
  const auto file = write_lines(inst.dir.file("in.jsonl"), lockin_lines(200));
  RunResult r;
  std::thread sender([&] { r = inst.lphi({"send", "--source", "lockin-a", "--timeout", "60"}, file); });
  std::this_thread::sleep_for(std::chrono::milliseconds(500));
  ASSERT_TRUE(inst.daemon.start());
  sender.join();
  EXPECT_EQ(r.exit_code, 0) << r.err;
  EXPECT_NE(r.out.find("accepted 200"), std::string::npos) << r.out;
  EXPECT_EQ(inst.daemon.stop(), 0);
}

TEST(Instance, ASecondDaemonOnTheSameDirectoryIsRefused) {
  Instance inst;
  ASSERT_TRUE(inst.daemon.start());
  auto second = run_program({LPHID_PATH, "--data-dir", inst.dir.path(), "--config", inst.config},
                            "", std::chrono::seconds(30));
  EXPECT_NE(second.exit_code, 0);
  EXPECT_NE(second.err.find("another lphid"), std::string::npos) << second.err;
  // The first one is unharmed.
  EXPECT_TRUE(inst.daemon.status(std::chrono::seconds(5)).has_value());
  EXPECT_EQ(inst.daemon.stop(), 0);
}

TEST(Instance, ClientsReportAnUnreachableDaemonAndUnknownData) {
  Instance inst;
  auto s = inst.lphi({"status", "--timeout", "0.5"});
  EXPECT_EQ(s.exit_code, 3);  // exit_unreachable
  auto e = inst.lphi({"export", "readings", "--source", "lockin-a"});
  EXPECT_EQ(e.exit_code, 4);  // exit_no_data: no database yet
  ASSERT_TRUE(inst.daemon.start());
  auto u = inst.lphi({"export", "readings", "--source", "no-such-source"});
  EXPECT_EQ(u.exit_code, 4);
  EXPECT_NE(u.err.find("no-such-source"), std::string::npos) << u.err;
  auto bad = inst.lphi({"send", "--source", "no-such-source", "--timeout", "10"}, "");
  EXPECT_EQ(bad.exit_code, 2);
  EXPECT_NE(bad.err.find("unknown_source"), std::string::npos) << bad.err;
  EXPECT_EQ(inst.daemon.stop(), 0);
}

}  // namespace
}  // namespace lphi::testing
