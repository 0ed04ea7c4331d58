// AlertEngine: lphid's alert rules, their lifecycle and their sinks.
//
// The live analysis and lphid's health timer hand the engine facts (below);
// the engine evaluates every configured rule on them, keeps one alert per
// (rule, subject) through its lifecycle
//     raised -> (acknowledged) -> cleared
// with hysteresis so that a flapping value does not raise it again and
// again, stores every change (time, value, context), and sends each change
// to the sinks: the log, the event socket (ZeroMQ PUB, topic "alert") and
// an optional command hook.
//
// Times. Facts from the analysis carry event time (the readings' own t), so
// that replaying the same readings gives the same alerts; facts from the
// health timer carry wall time. Both are seconds since the Unix epoch.
//
// Thread safety: every public member may be called from any thread.
#pragma once

#include <cstdint>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "daemon/alerts/alert_config.hpp"
#include "daemon/alerts/severity.hpp"
#include "daemon/store/database.hpp"

namespace lphi::alerts {

// --- facts -----------------------------------------------------------------

// One sweep fit, after it is stored.
// sweep_id is the sweeps row's id (stored in the context); sweep_index is
// the sweep's index as `lphi sweeps` lists it (from 0), which the messages name.
struct FitFact {
  std::string sample;
  std::int64_t sweep_id = 0;
  std::int64_t sweep_index = 0;
  double t = 0.0;               // event time: end of the sweep
  bool ok = false;              // false: the fit failed (error below)
  std::string error;
  bool converged = false;
  double chi2_red = 0.0;
  double lphi_m = 0.0, lphi_err_m = 0.0;
  double temperature_k = 0.0;
  std::vector<std::string> flags;
};

// One completed sweep (before or without a fit).
struct SweepFact {
  std::string sample;
  std::int64_t sweep_id = 0;
  std::int64_t sweep_index = 0;
  double t = 0.0;                      // event time: end of the sweep
  bool temperature_unstable = false;
  double temperature_k = 0.0, temperature_spread_k = 0.0;
  std::size_t n_points = 0;
  std::size_t n_overload = 0;          // points the lock-in flagged
  double max_quadrature_ratio = 0.0;   // max |Y/X| over the sweep
  double excitation_ratio = 0.0;       // e V / k_B T at the sweep's temperature
};

// The sample's verdict after an update.
struct VerdictFact {
  std::string sample;
  double t = 0.0;                       // event time of the update
  std::string state;                    // dephasing::state_name
  std::optional<bool> electrons_cooling;
  std::optional<std::string> likely_cause;
  std::optional<double> t_sat_k, lphi_sat_m;
  std::int64_t cooldown = 1;            // whose sweeps it judged (sample_pipeline.hpp)
  std::int64_t sweep_index = 0;         // the sweep whose fit triggered it
};

// lphid's health, once per tick of its timer (wall time).
struct SourceHealth {
  std::string name;
  std::optional<double> last_arrival_unix;  // wall time a reading last arrived
  std::uint64_t gaps = 0;                   // gaps recorded so far
};
struct HealthFact {
  double now_unix = 0.0;
  std::vector<SourceHealth> sources;
  std::optional<double> disk_free_bytes;    // on the data directory's file system
  double writer_lag_s = 0.0;
};

// --- alerts ----------------------------------------------------------------

// Severity and State: daemon/alerts/severity.hpp.

struct Alert {
  std::int64_t id = 0;
  std::string rule;      // e.g. "lphi-range", "fit-failed", "source-silent"
  std::string subject;   // sample or source name ("" for the daemon itself)
  Severity severity = Severity::warning;
  State state = State::raised;
  double raised_at = 0.0;
  std::optional<double> acked_at, cleared_at;
  std::optional<double> value;   // the value that raised it (or the last one)
  std::string message;           // one line for people
  nlohmann::json context;        // the facts behind it
  std::int64_t count = 1;        // observations that triggered it while live
};

// The alert as the control replies and the event socket show it:
// {"id","rule","severity","state","raised_at","acked_at","cleared_at",
//  "message","subject","value","context","count"} (absent times are null).
nlohmann::json alert_json(const Alert& alert);

class EventPublisher;
class HookRunner;

// The engine. create() opens its own connection to the database (applying
// the schema migrations if the file is new) and loads the alerts not yet
// cleared, so a restart keeps their state and continues their ids.
//
// Every rule keeps, per subject, a count of consecutive good observations;
// a live alert is cleared when that count reaches the rule's clear_after.
// A live alert that is triggered again stays the same alert: its value,
// context and count are updated and the change is stored as "updated".
//
// A change reaches the log (info, warn or error by severity), the event
// socket (topic "alert") and the hook. The hook runs on its own thread
// behind a bounded queue: the engine never waits for it.
//
// A database error is logged and counted; the engine keeps its state in
// memory and goes on.
class AlertEngine {
 public:
  struct Counters {
    std::uint64_t changes = 0;         // raised + updated + acknowledged + cleared
    std::uint64_t store_errors = 0;
    std::uint64_t hook_runs = 0;       // the hook was started
    std::uint64_t hook_failures = 0;   // could not start, or exited non-zero / by a signal
    std::uint64_t hook_timeouts = 0;   // killed after hook_timeout_s
    std::uint64_t hook_rate_limited = 0;  // dropped: more than hook_max_per_minute
    std::uint64_t hook_queue_full = 0;    // dropped: hook_queue changes already waiting
    std::string hook_failed;              // non-empty: the hook's thread failed (hook_runner.hpp)
  };

  static Status create(const AlertConfig& config, const std::string& database_path,
                              EventPublisher* events, std::unique_ptr<AlertEngine>& out);

  AlertEngine(const AlertEngine&) = delete;
  AlertEngine& operator=(const AlertEngine&) = delete;
  ~AlertEngine();  // stops the hook thread (a running hook is killed)

  // From the analysis (event time).
  void on_sweep(const SweepFact& fact);
  void on_fit(const FitFact& fact);
  void on_verdict(const VerdictFact& fact);
  // From lphid's health timer (wall time).
  void on_health(const HealthFact& fact);

  // {"type":"alerts","all":bool?,"sample":NAME?} and {"type":"ack","id":N};
  // anything else, or a bad key, gets protocol::error_message.
  nlohmann::json handle_request(const nlohmann::json& request);

  // Newest first. Without `all`, only alerts not cleared; `subject` filters.
  std::vector<Alert> list(bool all, std::optional<std::string> subject = std::nullopt);

  // Acknowledges a live alert at wall time now_unix. Fails naming why: no
  // alert with that id, or it is already cleared.
  Status acknowledge(std::int64_t id, double now_unix);

  Counters counters() const;

  // Waits until the hook queue is empty and no hook runs, or timeout_s
  // passed; true when idle. For an orderly stop and for tests.
  bool wait_hook_idle(double timeout_s);

 private:
  struct Impl;
  explicit AlertEngine(std::unique_ptr<Impl> impl);
  std::unique_ptr<Impl> impl_;
};

}  // namespace lphi::alerts
