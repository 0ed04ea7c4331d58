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
// One writer of the database: the engine's in-memory state is the truth for
// its decisions. Every change it stores (alerts and alert_events rows, the
// progress toward a clear, acknowledgements) is submitted to the store
// writer as a task and never waited for, so a fact from the ingest thread's
// health tick never blocks on the database. When the writer's queue refuses
// a task, the engine keeps it, in order, in a bounded list (pending_max) and
// submits it again on its next call (at least once a second, from the health
// tick). At the bound the newest change is dropped, counted (store_dropped)
// and logged: its alert_events row is lost, but the alert's row catches up
// with its next stored change, which writes the whole row. A writer that
// has failed (store/writer.hpp) takes nothing more: a change is then not
// kept but counted as a store error, and an acknowledgement is refused.
// (That queue is AlertWrites, alert_writes.hpp; the rules' judgements of
// each fact are in alert_rules.hpp.)
//
// Thread safety: every public member may be called from any thread.
#pragma once

#include <cstdint>
#include <functional>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "daemon/alerts/alert_config.hpp"
#include "daemon/alerts/severity.hpp"
#include "schema/status.hpp"

namespace lphi::store {
class StoreWriter;
}  // namespace lphi::store

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
  // The field axis (analysis/sweep_analysis.hpp), when the sweep could be
  // centred: the offset applied, the lag field from the sweep and its
  // partner of the other direction, and B_phi of the fit.
  std::optional<double> field_offset_t, lag_field_t, b_phi_t;
  std::string advice;  // one line with a number, or empty
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

// The engine. create() opens a read-only connection to the database (the
// store writer has applied the migrations) and loads the alerts not yet
// cleared, so a restart keeps their state and continues their ids; its
// writes go through `writer`, which must outlive the engine.
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
  // Store writes kept while the writer's queue has no room (see above).
  static constexpr std::size_t pending_max = 4096;

  struct Counters {
    std::uint64_t changes = 0;         // raised + updated + acknowledged + cleared
    std::uint64_t store_errors = 0;    // writes the database refused
    std::uint64_t store_deferred = 0;  // writes the writer's queue refused at first (kept, retried)
    std::uint64_t store_dropped = 0;   // writes dropped at pending_max
    std::size_t store_pending = 0;     // writes kept now
    std::uint64_t hook_runs = 0;       // the hook was started
    std::uint64_t hook_failures = 0;   // could not start, or exited non-zero / by a signal
    std::uint64_t hook_timeouts = 0;   // killed after hook_timeout_s
    std::uint64_t hook_rate_limited = 0;  // dropped: more than hook_max_per_minute
    std::uint64_t hook_queue_full = 0;    // dropped: hook_queue changes already waiting
    std::string hook_failed;              // non-empty: the hook's thread failed (hook_runner.hpp)
  };

  static Status create(const AlertConfig& config, store::StoreWriter& writer,
                       const std::string& database_path, EventPublisher* events,
                       std::unique_ptr<AlertEngine>& out);

  AlertEngine(const AlertEngine&) = delete;
  AlertEngine& operator=(const AlertEngine&) = delete;
  // Stops the hook thread (a running hook is killed). Changes still kept for
  // the writer are submitted once more; what it cannot take is logged as not
  // stored (and an acknowledgement waiting for it is answered "unavailable").
  ~AlertEngine();

  // From the analysis (event time).
  void on_sweep(const SweepFact& fact);
  void on_fit(const FitFact& fact);
  void on_verdict(const VerdictFact& fact);
  // From lphid's health timer (wall time).
  void on_health(const HealthFact& fact);

  // {"type":"alerts","all":bool?,"sample":NAME?} and {"type":"ack","id":N};
  // anything else, or a bad key, gets protocol::error_message. `reply` is
  // called once: at once, except for an acknowledgement that changes the
  // alert, whose reply comes from the store writer's thread once it is
  // durable. Never blocks (the ingest thread's control socket calls it).
  void handle_request(const nlohmann::json& request, std::function<void(nlohmann::json)> reply);
  // The same, waiting for the reply: for tests and tools, never for the
  // ingest thread.
  nlohmann::json handle_request(const nlohmann::json& request);

  // Newest first. Without `all`, only alerts not cleared; `subject` filters.
  std::vector<Alert> list(bool all, std::optional<std::string> subject = std::nullopt);

  // Acknowledges a live alert at wall time now_unix. Decided at once from the
  // engine's state: Status::not_found (no alert has that id) or
  // Status::conflict (it is already cleared) go to `done` at once, as does
  // success for an alert already acknowledged; otherwise `done` runs on the
  // store writer's thread when the acknowledgement is durable (or with the
  // writer's error). Never blocks.
  void acknowledge(std::int64_t id, double now_unix, std::function<void(const Status&)> done);
  // The same, waiting for `done`: for tests and tools.
  Status acknowledge(std::int64_t id, double now_unix);

  Counters counters() const;

  // Waits until the hook queue is empty and no hook runs, or timeout_s
  // passed; true when idle. For an orderly stop and for tests.
  bool wait_hook_idle(double timeout_s);
  // Waits until every change submitted so far is durable (or refused by the
  // database), retrying kept ones, or timeout_s passed; true when settled.
  // For tests and tools: the engine itself never waits for the writer.
  bool wait_stored(double timeout_s);

 private:
  struct Impl;
  nlohmann::json answer_or_ack(const nlohmann::json& request, std::optional<std::int64_t>& ack);
  explicit AlertEngine(std::unique_ptr<Impl> impl);
  std::unique_ptr<Impl> impl_;
};

}  // namespace lphi::alerts
