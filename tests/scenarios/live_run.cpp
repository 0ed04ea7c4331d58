#include "tests/scenarios/live_run.hpp"

#include <fmt/format.h>
#include <unistd.h>

#include <cmath>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <sstream>

namespace lphi::testing {

using namespace std::chrono_literals;

std::string default_analysis_keys() {
  return "sweep_min_span_t = 0.015\n"
         "reversal_tolerance_t = 1e-4\n"
         "plateau_relative_spread = 0.03\n"
         "max_age_field_s = 5.0\n";
}

LiveRun::LiveRun() = default;

LiveRun::~LiveRun() {
  daemon_.reset();  // kills a daemon still running, before the directory goes
}

bool LiveRun::record(const std::string& scenario_name, double rate_hz,
                     const std::vector<std::string>& extra) {
  const std::string stem = scenario_name.substr(0, scenario_name.find('.'));
  csv_ = file(stem + ".csv");
  const std::string truth_path = file(stem + ".truth.jsonl");
  const std::string rate = fmt::format("{:.12g}", rate_hz);
  std::vector<std::string> args = {LPHI_SIM_PATH,
                                   std::string(LPHI_SOURCE_DIR) + "/drivers/sim/scenarios/" + scenario_name,
                                   "--record", csv_, "--rate-hz", rate, "--truth", truth_path};
  args.insert(args.end(), extra.begin(), extra.end());
  const RunResult r = run_program(args, "", 120s);
  if (r.exit_code != 0) {
    error_ = "lphi-sim --record failed (" + std::to_string(r.exit_code) + "): " + r.err;
    return false;
  }
  std::ifstream in(truth_path);
  std::string line;
  records_.clear();
  while (std::getline(in, line)) {
    auto j = nlohmann::json::parse(line, nullptr, false);
    if (j.is_discarded()) {
      error_ = "bad truth line: " + line;
      return false;
    }
    if (j["record"] == "scenario") scenario_ = j;
    else records_.push_back(std::move(j));
  }
  if (!scenario_.is_object()) {
    error_ = "the truth file has no scenario record";
    return false;
  }
  return true;
}

std::vector<nlohmann::json> LiveRun::truth(const std::string& kind) const {
  std::vector<nlohmann::json> out;
  for (const auto& r : records_)
    if (r["record"] == kind) out.push_back(r);
  return out;
}

void LiveRun::write_config(const std::string& sample, const std::string& model,
                           const std::string& sample_extra, const std::string& tail) {
  write_config_file(sample, model, false, sample_extra, tail);
}

void LiveRun::write_default_config(const std::string& sample, const std::string& model) {
  write_config_file(sample, model, true, "", "");
}

void LiveRun::write_config_file(const std::string& sample, const std::string& model, bool defaults,
                                const std::string& sample_extra, const std::string& tail) {
  const auto& s = scenario_["sample"];
  const auto& l = scenario_["lockin"];
  auto num = [](double v) { return fmt::format("{:.17g}", v); };
  std::ofstream out(file("lphid.toml"));
  // The example config's [ingest] sets time_backward_tolerance_s = 60 too.
  out << "[daemon]\nlog_level = \"info\"\n"
      << "[store]\n" << (defaults ? "" : store_keys_) << "[ingest]\ntime_backward_tolerance_s = 60.0\n"
         "[[source]]\nname = \"lockin\"\nkind = \"lockin\"\n"
         "[[source]]\nname = \"mxc\"\nkind = \"thermometer\"\n"
         "[[source]]\nname = \"magnet\"\nkind = \"field\"\n"
         "[[sample]]\n"
      << "name = \"" << sample << "\"\n"
      << "model = \"" << (model.empty() ? s["model"].get<std::string>() : model) << "\"\n"
      << "squares = " << num(s["squares"]) << "\n"
      << "width_m = " << num(s["width_m"]) << "\n"
      << "thickness_m = " << num(s["thickness_m"]) << "\n"
      << "excitation_a = " << num(l["current_a"]) << "\n"
      << "gain = " << num(l["gain"]) << "\n"
      << "lockin = \"lockin\"\nthermometer = \"mxc\"\nfield = \"magnet\"\n"
      << (defaults ? "" : default_analysis_keys()) << sample_extra << "\n"
      << tail << "\n";
}

bool LiveRun::start_daemon(const std::string& data) {
  data_dir_ = file(data);
  std::filesystem::create_directories(data_dir_);
  daemon_ = std::make_unique<DaemonProcess>(data_dir_, file("lphid.toml"));
  if (!daemon_->start()) {
    error_ = "lphid did not start: " + daemon_log();
    return false;
  }
  return true;
}

int LiveRun::stop_daemon() {
  if (!daemon_) return -1;
  const int rc = daemon_->stop();
  daemon_.reset();
  return rc;
}

std::string LiveRun::daemon_log() const {
  std::string text;
  for (const char* name : {"/lphid.stderr", "/lphid.log"}) {
    std::ifstream in(data_dir_ + name);
    std::ostringstream s;
    s << in.rdbuf();
    text += s.str();
  }
  return text.size() > 4000 ? text.substr(text.size() - 4000) : text;
}

RunResult LiveRun::lphi(std::vector<std::string> args, std::chrono::seconds timeout) {
  args.insert(args.begin(), LPHI_PATH);
  args.push_back("--data-dir");
  args.push_back(data_dir_);
  return run_program(args, "", timeout);
}

RunResult LiveRun::replay(const std::string& csv, const std::string& sample,
                          std::optional<double> start_unix) {
  std::vector<std::string> args = {"replay", csv, "--sample", sample, "--fast"};
  if (start_unix) {
    args.push_back("--start-unix");
    args.push_back(fmt::format("{:.17g}", *start_unix));
  }
  return lphi(args, 240s);
}

std::optional<nlohmann::json> LiveRun::query(const std::string& command, const std::string& sample,
                                             std::vector<std::string> more) {
  std::vector<std::string> args = {command, "--json"};
  if (!sample.empty()) {
    args.push_back("--sample");
    args.push_back(sample);
  }
  args.insert(args.end(), more.begin(), more.end());
  const RunResult r = lphi(args);
  auto j = nlohmann::json::parse(r.out, nullptr, false);
  if (r.exit_code != 0 || j.is_discarded()) {
    error_ = "lphi " + command + " --json: exit " + std::to_string(r.exit_code) + "\n" + r.out + r.err;
    return std::nullopt;
  }
  return j;
}

std::optional<nlohmann::json> LiveRun::verdict(const std::string& sample) {
  auto j = query("verdict", sample);
  if (!j) return std::nullopt;
  if (j->is_object()) return j;
  if (j->is_array()) {
    for (const auto& v : *j)
      if (v.value("sample", "") == sample) return v;
  }
  error_ = "no verdict for " + sample + " in " + j->dump();
  return std::nullopt;
}

bool copy_recording(const std::string& from, const std::string& to, double offset_s, double from_s,
                    double to_s) {
  std::ifstream in(from);
  std::ofstream out(to);
  std::string line;
  if (!std::getline(in, line)) return false;
  out << line << '\n';
  while (std::getline(in, line)) {
    const auto comma = line.find(',');
    const double t = std::stod(line.substr(0, comma));
    if (t < from_s || t >= to_s) continue;
    out << fmt::format("{:.12g}", t + offset_s) << line.substr(comma) << '\n';
  }
  return static_cast<bool>(out);
}

std::vector<nlohmann::json> alerts_of(const nlohmann::json& all, const std::string& rule) {
  std::vector<nlohmann::json> out;
  if (!all.is_array()) return out;
  for (const auto& a : all)
    if (a.value("rule", "") == rule) out.push_back(a);
  return out;
}

}  // namespace lphi::testing
