// One simulated cooldown end to end, for the scenario tests: the scenario
// recorded with `lphi-sim --record`, a real lphid started in a fresh data
// directory with a sample configured for the scenario, the recording
// streamed in with `lphi replay --fast`, and the daemon's answers read back
// with the `lphi` client's --json commands. Every wait is bounded.
#pragma once

#include <chrono>
#include <memory>
#include <nlohmann/json.hpp>
#include <optional>
#include <string>
#include <vector>

#include "tests/support/daemon_process.hpp"
#include "tests/support/temp_dir.hpp"

namespace lphi::testing {

// The analysis keys every scenario test uses (daemon/config/config.hpp),
// set for lphi-sim's programmes (drivers/sim/COMMANDS.md):
//   sweep_min_span_t 15 mT: the narrowest sweeps run from -10 to +10 mT;
//   reversal_tolerance_t 0.1 mT: 50 times the magnet's 2 uT noise;
//   plateau_relative_spread 3 %: the range of ~5000 readings with 0.2 %
//     noise is about 8 standard deviations, 1.6 % (segmenter.hpp);
//   max_age_field_s 5 s: a recording at 1 Hz has a field reading every second.
std::string default_analysis_keys();

class LiveRun {
 public:
  LiveRun();   // a fresh temporary directory
  ~LiveRun();  // stops lphid if it still runs, removes the directory
  LiveRun(const LiveRun&) = delete;
  LiveRun& operator=(const LiveRun&) = delete;

  const std::string& dir() const { return dir_.path(); }
  std::string file(const std::string& name) const { return dir_.file(name); }

  // lphi-sim drivers/sim/scenarios/NAME --record DIR/NAME.csv --truth ...
  // at `rate_hz`, plus `extra`. Fills truth(); false with the reason in
  // error() on failure.
  bool record(const std::string& scenario_name, double rate_hz,
              const std::vector<std::string>& extra = {});
  const std::string& csv_path() const { return csv_; }
  const nlohmann::json& scenario_record() const { return scenario_; }
  std::vector<nlohmann::json> truth(const std::string& record_kind) const;  // "sweep" / "plateau"

  // Writes DIR/lphid.toml: three sources (lockin, mxc, magnet) and one
  // sample `sample` with the recorded scenario's geometry, excitation and
  // gain, `model` (empty: the scenario's), default_analysis_keys() and
  // `sample_extra` lines, then `tail` (e.g. an [alerts] table).
  void write_config(const std::string& sample, const std::string& model,
                    const std::string& sample_extra = "", const std::string& tail = "");
  // The same sample, but with lphid's defaults for every analysis key and
  // for [store] and [ingest]: only what `lphid --print-example-config`
  // sets, plus the sample's geometry, excitation and gain.
  void write_default_config(const std::string& sample, const std::string& model);
  // The [store] keys write_config writes (default "commit_max_ms = 20").
  void set_store_keys(std::string keys) { store_keys_ = std::move(keys); }

  // A data directory (under dir()) and its lphid; start() waits for status.
  bool start_daemon(const std::string& data = "data");
  int stop_daemon();  // SIGTERM and wait; the exit status
  std::string data_dir() const { return data_dir_; }
  std::string daemon_log() const;

  RunResult lphi(std::vector<std::string> args, std::chrono::seconds timeout = std::chrono::seconds(60));
  // `lphi replay CSV --sample NAME --fast [--start-unix T]`; returns when
  // the daemon has analysed everything (the command's contract). Without
  // start_unix, relative times are placed so that the recording ends now.
  RunResult replay(const std::string& csv, const std::string& sample,
                   std::optional<double> start_unix = std::nullopt);
  // `lphi COMMAND --json --sample NAME` parsed; nullopt (and error()) when
  // the command fails or prints no JSON.
  std::optional<nlohmann::json> query(const std::string& command, const std::string& sample,
                                      std::vector<std::string> more = {});
  // The verdict object of `sample` from `lphi verdict --json` (an array of
  // per-sample objects, or one object).
  std::optional<nlohmann::json> verdict(const std::string& sample);

  const std::string& error() const { return error_; }

 private:
  TempDir dir_;
  std::string data_dir_, csv_, error_;
  std::string store_keys_ = "commit_max_ms = 20\n";
  nlohmann::json scenario_;
  std::vector<nlohmann::json> records_;
  std::unique_ptr<DaemonProcess> daemon_;
  void write_config_file(const std::string& sample, const std::string& model, bool defaults,
                         const std::string& sample_extra, const std::string& tail);
};

// A copy of a recording with `offset_s` added to every time (e.g. relative
// times made Unix times) and only the rows with from_s <= t < to_s.
bool copy_recording(const std::string& from, const std::string& to, double offset_s, double from_s,
                    double to_s);

// The alerts of one rule in an `lphi alerts --all --json` array (none for
// anything else).
std::vector<nlohmann::json> alerts_of(const nlohmann::json& all, const std::string& rule);

}  // namespace lphi::testing
