#include "daemon/alerts/alert_engine.hpp"

#include <algorithm>
#include <chrono>
#include <cmath>
#include <condition_variable>
#include <deque>
#include <future>
#include <map>
#include <mutex>
#include <utility>

#include <spdlog/fmt/fmt.h>
#include <spdlog/spdlog.h>

#include "daemon/alerts/alert_store.hpp"
#include "daemon/alerts/event_publisher.hpp"
#include "daemon/alerts/hook_runner.hpp"
#include "daemon/store/writer.hpp"
#include "schema/protocol/codec.hpp"

namespace lphi::alerts {

using nlohmann::json;

namespace {

double wall_now() {
  return std::chrono::duration<double>(std::chrono::system_clock::now().time_since_epoch()).count();
}

json optional_json(const std::optional<double>& v) {
  return v && std::isfinite(*v) ? json(*v) : json(nullptr);
}

// A finite value or none (JSON and the value column hold no infinity).
std::optional<double> finite(double v) {
  if (std::isfinite(v)) return v;
  return std::nullopt;
}

// How long a re-triggered health alert (judged once a second) waits before
// its updated value is stored and published again.
constexpr double health_update_interval_s = 60.0;

// The list of "all" alerts is bounded.
constexpr std::size_t list_limit = 10000;

enum class Judgement {
  bad,   // the condition holds: raise, or update the live alert
  good,  // clearly fine: counts toward clear_after
  band,  // inside the limit but not by the hysteresis margin: the good run restarts
  none,  // nothing to judge (e.g. no L_phi from a failed fit)
};

struct Observation {
  Judgement judgement = Judgement::none;
  std::optional<double> value;
  std::string message;  // for bad
  json context = json::object();
};

// The common judgement of a value against an upper limit with hysteresis.
Judgement above_limit(double value, double limit, double hysteresis) {
  if (!(value <= limit)) return Judgement::bad;  // NaN and +inf are bad too
  if (value < limit * (1.0 - hysteresis)) return Judgement::good;
  return Judgement::band;
}

// ... and against a lower limit.
Judgement below_limit(double value, double limit, double hysteresis) {
  if (!(value >= limit)) return Judgement::bad;
  if (value > limit * (1.0 + hysteresis)) return Judgement::good;
  return Judgement::band;
}

struct RuleSettings {
  bool enabled;
  Severity severity;
  std::int64_t clear_after;
};

template <class Rule>
RuleSettings settings(const Rule& r) {
  return {r.enabled, r.severity, r.clear_after};
}

std::string format_bytes(double bytes) {
  if (bytes >= 1e9) return fmt::format("{:.2f} GB", bytes / 1e9);
  if (bytes >= 1e6) return fmt::format("{:.1f} MB", bytes / 1e6);
  return fmt::format("{:.0f} bytes", bytes);
}

}  // namespace

json alert_json(const Alert& a) {
  return {{"id", a.id},
          {"rule", a.rule},
          {"subject", a.subject},
          {"severity", severity_name(a.severity)},
          {"state", state_name(a.state)},
          {"raised_at", a.raised_at},
          {"acked_at", optional_json(a.acked_at)},
          {"cleared_at", optional_json(a.cleared_at)},
          {"value", optional_json(a.value)},
          {"count", a.count},
          {"message", a.message},
          {"context", a.context.is_null() ? json::object() : a.context}};
}

// What the store writer's completions share with the engine. Held by
// shared_ptr so that a completion arriving after the engine is gone is safe.
struct WriteTracker {
  std::mutex mutex;
  std::condition_variable settled;
  std::size_t in_flight = 0;        // submitted, completion not yet run
  std::uint64_t store_errors = 0;
  // Cleared alerts whose clear is not durable yet: `alerts --all` shows them
  // as they are, not as the database still has them.
  std::map<std::int64_t, Alert> clearing;
};

// One store write: a task for the writer thread, and what to do when it is
// durable (or refused).
struct PendingWrite {
  std::int64_t alert_id = 0;
  std::string what;  // for the log: "raised", "good_count", ...
  std::function<Status(store::Database&)> task;
  std::function<void(const Status&)> done;  // optional; runs on the writer thread
  bool clears = false;
};

struct AlertEngine::Impl {
  struct SourceTrack {
    double first_seen = 0.0;
    std::uint64_t gaps = 0;
    std::optional<double> last_new_gap;
  };
  using Key = std::pair<std::string, std::string>;  // rule, subject

  AlertConfig config;
  AlertStore store;  // reads only
  store::StoreWriter* writer = nullptr;
  EventPublisher* events = nullptr;
  std::unique_ptr<HookRunner> hook;
  std::shared_ptr<WriteTracker> tracker = std::make_shared<WriteTracker>();

  std::mutex mutex;
  std::map<Key, StoredAlert> live;
  std::map<Key, double> last_health_update;  // wall time an update was last stored
  std::map<std::string, SourceTrack> sources;
  std::int64_t next_id = 1;
  Counters counters;
  std::deque<PendingWrite> pending;  // refused by the writer's queue, in order; under `mutex`
  double last_drop_log = 0.0;

  // Hands one write to the store writer; false when its queue refused it.
  bool try_submit(PendingWrite& w) {
    store::WriteJob job;
    job.task = w.task;
    job.on_durable = [shared = tracker, id = w.alert_id, what = w.what, done = w.done,
                      clears = w.clears](const store::WriteResult& r) {
      {
        std::lock_guard lock(shared->mutex);
        if (!r.status) ++shared->store_errors;
        if (clears) shared->clearing.erase(id);
      }
      if (!r.status) spdlog::error("alert {}: cannot store the change ({}): {}", id, what, r.status.message());
      if (done) done(r.status);
      std::lock_guard lock(shared->mutex);
      --shared->in_flight;
      shared->settled.notify_all();
    };
    {
      std::lock_guard lock(tracker->mutex);
      ++tracker->in_flight;
    }
    if (writer->try_submit(job)) return true;
    std::lock_guard lock(tracker->mutex);
    --tracker->in_flight;
    return false;
  }

  // Submits the kept writes, oldest first, until the writer refuses one.
  void flush_pending() {
    while (!pending.empty() && try_submit(pending.front())) pending.pop_front();
  }

  // Every store write of the engine comes here, under `mutex`, in the order
  // of the changes: a write never overtakes one kept before it.
  void submit(PendingWrite w) {
    flush_pending();
    if (pending.empty() && try_submit(w)) return;
    if (writer->failed()) {
      // Not a full queue but a writer that takes nothing more: keeping the
      // change would only delay the same answer.
      ++counters.store_errors;
      spdlog::error("alert {}: the change ({}) is not stored: the store writer has failed", w.alert_id, w.what);
      if (w.clears) {
        std::lock_guard lock(tracker->mutex);
        tracker->clearing.erase(w.alert_id);
      }
      if (w.done) w.done(Status::unavailable("the store writer has failed; the change is not stored"));
      return;
    }
    if (pending.size() >= pending_max) {
      ++counters.store_dropped;
      const double now = wall_now();
      if (now - last_drop_log >= 10.0) {
        last_drop_log = now;
        spdlog::error("alert {}: the change ({}) is not stored: the store writer took no write for a "
                      "while and {} are waiting ({} dropped so far)",
                      w.alert_id, w.what, pending.size(), counters.store_dropped);
      }
      if (w.clears) {
        std::lock_guard lock(tracker->mutex);
        tracker->clearing.erase(w.alert_id);
      }
      if (w.done) w.done(Status::unavailable("the store writer has no room; the change is not stored"));
      return;
    }
    if (counters.store_deferred++ % 1000 == 0) {
      spdlog::warn("alerts: the store writer's queue is full; {} change(s) kept to be stored later",
                   pending.size() + 1);
    }
    pending.push_back(std::move(w));
  }

  void persist(const StoredAlert& s, std::string_view change, double t, std::optional<double> value,
               const json& context, std::function<void(const Status&)> done = {}) {
    PendingWrite w;
    w.alert_id = s.alert.id;
    w.what = std::string(change);
    w.clears = s.alert.state == State::cleared;
    if (w.clears) {
      std::lock_guard lock(tracker->mutex);
      tracker->clearing[s.alert.id] = s.alert;
    }
    w.task = [s, what = w.what, t, wall = wall_now(), value, context](store::Database& db) {
      return AlertStore::write_change(db, s, what, t, wall, value, context);
    };
    w.done = std::move(done);
    submit(std::move(w));
  }

  void persist_good_count(std::int64_t id, std::int64_t good_count) {
    PendingWrite w;
    w.alert_id = id;
    w.what = "progress toward the clear";
    w.task = [id, good_count](store::Database& db) { return AlertStore::write_good_count(db, id, good_count); };
    submit(std::move(w));
  }

  void announce(const Alert& a, std::string_view change, bool to_hook) {
    ++counters.changes;
    if (change == "raised") {
      const auto level = a.severity == Severity::critical  ? spdlog::level::err
                         : a.severity == Severity::warning ? spdlog::level::warn
                                                           : spdlog::level::info;
      spdlog::log(level, "alert {} raised ({}, {}): {}", a.id, a.rule, severity_name(a.severity),
                  a.message);
    } else if (change == "updated") {
      spdlog::debug("alert {} updated ({}): {}", a.id, a.rule, a.message);
    } else {
      spdlog::info("alert {} {} ({}): {}", a.id, change, a.rule, a.message);
    }
    json body = alert_json(a);
    body["change"] = change;
    if (events != nullptr) events->publish("alert", body);
    if (to_hook && hook) hook->submit(body.dump(-1, ' ', false, json::error_handler_t::replace));
  }

  void evaluate(std::string_view rule, const std::string& subject, const RuleSettings& rs,
                Observation obs, double t, bool health) {
    if (!rs.enabled || obs.judgement == Judgement::none) return;
    const Key key{std::string(rule), subject};
    auto it = live.find(key);
    switch (obs.judgement) {
      case Judgement::bad: {
        if (it == live.end()) {
          StoredAlert s;
          Alert& a = s.alert;
          a.id = next_id++;
          a.rule = key.first;
          a.subject = subject;
          a.severity = rs.severity;
          a.state = State::raised;
          a.raised_at = t;
          a.value = obs.value;
          a.message = std::move(obs.message);
          a.context = std::move(obs.context);
          persist(s, "raised", t, a.value, a.context);
          announce(a, "raised", true);
          if (health) last_health_update[key] = wall_now();
          live.emplace(key, std::move(s));
          return;
        }
        StoredAlert& s = it->second;
        s.alert.value = obs.value;
        s.alert.count += 1;
        s.alert.message = std::move(obs.message);
        s.alert.context = std::move(obs.context);
        s.good_count = 0;
        if (health) {
          const double now = wall_now();
          auto last = last_health_update.find(key);
          if (last != last_health_update.end() && now - last->second < health_update_interval_s) return;
          last_health_update[key] = now;
        }
        persist(s, "updated", t, s.alert.value, s.alert.context);
        announce(s.alert, "updated", false);
        return;
      }
      case Judgement::good: {
        if (it == live.end()) return;
        StoredAlert& s = it->second;
        s.good_count += 1;
        if (s.good_count < rs.clear_after) {
          persist_good_count(s.alert.id, s.good_count);
          return;
        }
        s.alert.state = State::cleared;
        s.alert.cleared_at = t;
        persist(s, "cleared", t, obs.value, obs.context);
        announce(s.alert, "cleared", true);
        live.erase(it);
        last_health_update.erase(key);
        return;
      }
      case Judgement::band: {
        if (it == live.end() || it->second.good_count == 0) return;
        it->second.good_count = 0;
        persist_good_count(it->second.alert.id, 0);
        return;
      }
      case Judgement::none:
        return;
    }
  }
};

AlertEngine::AlertEngine(std::unique_ptr<Impl> impl) : impl_(std::move(impl)) {}

AlertEngine::~AlertEngine() {
  Impl& m = *impl_;
  std::lock_guard lock(m.mutex);
  m.flush_pending();
  if (m.pending.empty()) return;
  spdlog::error("alerts: {} change(s) not stored: the store writer took no more writes", m.pending.size());
  for (PendingWrite& w : m.pending) {
    if (w.done) w.done(Status::unavailable("lphid is stopping; the change is not stored"));
  }
  m.pending.clear();
}

Status AlertEngine::create(const AlertConfig& config, store::StoreWriter& writer,
                           const std::string& database_path, EventPublisher* events,
                           std::unique_ptr<AlertEngine>& out) {
  auto impl = std::make_unique<Impl>();
  impl->config = config;
  impl->writer = &writer;
  impl->events = events;
  if (auto s = AlertStore::open(database_path, impl->store); !s) return s;
  std::vector<StoredAlert> live;
  std::int64_t max_id = 0;
  if (auto s = impl->store.load_live(live, max_id); !s) return s;
  impl->next_id = max_id + 1;
  for (auto& s : live) {
    Impl::Key key{s.alert.rule, s.alert.subject};
    impl->live.emplace(std::move(key), std::move(s));
  }
  if (!config.hook_command.empty()) {
    impl->hook = std::make_unique<HookRunner>(config.hook_command, config.hook_timeout_s,
                                              config.hook_max_per_minute,
                                              static_cast<std::size_t>(config.hook_queue));
  }
  if (!impl->live.empty()) spdlog::info("alerts: {} not cleared from before", impl->live.size());
  out.reset(new AlertEngine(std::move(impl)));
  return Status::success();
}

void AlertEngine::on_fit(const FitFact& f) {
  Impl& m = *impl_;
  std::lock_guard lock(m.mutex);
  m.flush_pending();
  const AlertConfig& c = m.config;
  const json base = {{"sweep_id", f.sweep_id},
                     {"sweep_index", f.sweep_index},
                     {"t", f.t},
                     {"temperature_k", f.temperature_k}};

  Observation failed;
  failed.context = base;
  if (!f.ok || !f.converged) {
    failed.judgement = Judgement::bad;
    failed.context["error"] = f.error;
    failed.context["converged"] = f.converged;
    failed.message = !f.ok ? fmt::format("sample {}: the fit of sweep {} failed: {}", f.sample,
                                         f.sweep_index, f.error.empty() ? "no reason given" : f.error)
                           : fmt::format("sample {}: the fit of sweep {} did not converge", f.sample,
                                         f.sweep_index);
  } else {
    failed.judgement = Judgement::good;
  }
  m.evaluate("fit-failed", f.sample, settings(c.fit_failed), std::move(failed), f.t, false);
  if (!f.ok) return;  // no chi-square, no L_phi to judge

  Observation chi2;
  chi2.value = finite(f.chi2_red);
  chi2.context = base;
  chi2.context["chi2_red"] = optional_json(chi2.value);
  chi2.context["max_chi2_red"] = c.fit_chi2.max_chi2_red;
  chi2.judgement = above_limit(f.chi2_red, c.fit_chi2.max_chi2_red, c.fit_chi2.hysteresis);
  chi2.message = fmt::format("sample {}: chi2_red = {:.3g} for sweep {} is above {:g}", f.sample,
                             f.chi2_red, f.sweep_index, c.fit_chi2.max_chi2_red);
  m.evaluate("fit-chi2", f.sample, settings(c.fit_chi2), std::move(chi2), f.t, false);

  Observation range;
  range.value = finite(f.lphi_m);
  range.context = base;
  range.context["lphi_m"] = optional_json(range.value);
  range.context["lphi_err_m"] = optional_json(finite(f.lphi_err_m));
  range.context["min_m"] = c.lphi_range.min_m;
  range.context["max_m"] = c.lphi_range.max_m;
  const Judgement low = below_limit(f.lphi_m, c.lphi_range.min_m, c.lphi_range.hysteresis);
  const Judgement high = above_limit(f.lphi_m, c.lphi_range.max_m, c.lphi_range.hysteresis);
  range.judgement = (low == Judgement::bad || high == Judgement::bad)     ? Judgement::bad
                    : (low == Judgement::good && high == Judgement::good) ? Judgement::good
                                                                          : Judgement::band;
  range.message = fmt::format("sample {}: L_phi = {:.3g} m from sweep {} is outside [{:g}, {:g}] m",
                              f.sample, f.lphi_m, f.sweep_index, c.lphi_range.min_m, c.lphi_range.max_m);
  m.evaluate("lphi-range", f.sample, settings(c.lphi_range), std::move(range), f.t, false);
}

void AlertEngine::on_sweep(const SweepFact& f) {
  Impl& m = *impl_;
  std::lock_guard lock(m.mutex);
  m.flush_pending();
  const AlertConfig& c = m.config;
  const json base = {{"sweep_id", f.sweep_id},
                     {"sweep_index", f.sweep_index},
                     {"t", f.t},
                     {"temperature_k", f.temperature_k},
                     {"n_points", f.n_points}};

  Observation unstable;
  unstable.context = base;
  unstable.context["temperature_spread_k"] = f.temperature_spread_k;
  unstable.value = finite(f.temperature_spread_k);
  unstable.judgement = f.temperature_unstable ? Judgement::bad : Judgement::good;
  unstable.message = fmt::format(
      "sample {}: the temperature changed during sweep {} (spread {:.3g} K around {:.4g} K); "
      "it is kept out of L_phi(T)",
      f.sample, f.sweep_index, f.temperature_spread_k, f.temperature_k);
  m.evaluate("temperature-unstable", f.sample, settings(c.temperature_unstable), std::move(unstable),
             f.t, false);

  Observation overload;
  overload.context = base;
  overload.context["n_overload"] = f.n_overload;
  overload.value = static_cast<double>(f.n_overload);
  overload.judgement = static_cast<std::int64_t>(f.n_overload) > c.lockin_overload.max_points
                           ? Judgement::bad
                           : Judgement::good;
  overload.message = fmt::format("sample {}: {} of the {} points of sweep {} overloaded the lock-in",
                                 f.sample, f.n_overload, f.n_points, f.sweep_index);
  m.evaluate("lockin-overload", f.sample, settings(c.lockin_overload), std::move(overload), f.t, false);

  Observation quadrature;
  quadrature.context = base;
  quadrature.value = finite(f.max_quadrature_ratio);
  quadrature.context["max_quadrature_ratio"] =
      std::isfinite(f.max_quadrature_ratio) ? json(f.max_quadrature_ratio) : json("infinite");
  quadrature.context["max_ratio"] = c.quadrature.max_ratio;
  quadrature.judgement =
      above_limit(f.max_quadrature_ratio, c.quadrature.max_ratio, c.quadrature.hysteresis);
  quadrature.message = fmt::format(
      "sample {}: |Y/X| reached {:.3g} in sweep {} (limit {:g}): check the lock-in phase and "
      "capacitive pickup",
      f.sample, f.max_quadrature_ratio, f.sweep_index, c.quadrature.max_ratio);
  m.evaluate("quadrature", f.sample, settings(c.quadrature), std::move(quadrature), f.t, false);

  Observation heating;
  heating.context = base;
  heating.value = finite(f.excitation_ratio);
  heating.context["excitation_ratio"] = optional_json(heating.value);
  heating.context["max_ratio"] = c.excitation_heating.max_ratio;
  heating.judgement = above_limit(f.excitation_ratio, c.excitation_heating.max_ratio,
                                  c.excitation_heating.hysteresis);
  heating.message = fmt::format(
      "sample {}: e V / k_B T = {:.3g} at {:.4g} K in sweep {} (limit {:g}): the excitation may "
      "heat the electrons",
      f.sample, f.excitation_ratio, f.temperature_k, f.sweep_index, c.excitation_heating.max_ratio);
  m.evaluate("excitation-heating", f.sample, settings(c.excitation_heating), std::move(heating), f.t,
             false);
}

void AlertEngine::on_verdict(const VerdictFact& f) {
  Impl& m = *impl_;
  std::lock_guard lock(m.mutex);
  m.flush_pending();
  const AlertConfig& c = m.config;
  json base = {{"t", f.t},
               {"sweep_index", f.sweep_index},
               {"cooldown", f.cooldown},
               {"state", f.state},
               {"t_sat_k", optional_json(f.t_sat_k)},
               {"lphi_sat_m", optional_json(f.lphi_sat_m)}};
  base["electrons_cooling"] = f.electrons_cooling ? json(*f.electrons_cooling) : json(nullptr);
  base["likely_cause"] = f.likely_cause ? json(*f.likely_cause) : json(nullptr);
  const std::string cause = f.likely_cause ? fmt::format(" (likely cause: {})", *f.likely_cause) : "";
  const std::string t_sat = f.t_sat_k ? fmt::format(", T_sat = {:.3g} K", *f.t_sat_k) : "";
  const std::string l_sat = f.lphi_sat_m ? fmt::format(", L_sat = {:.3g} m", *f.lphi_sat_m) : "";

  Observation saturating;
  saturating.context = base;
  saturating.value = f.t_sat_k;
  saturating.judgement = f.state == "saturating" ? Judgement::bad : Judgement::good;
  saturating.message =
      fmt::format("sample {}, cooldown {}: L_phi(T) is saturating{}{}", f.sample, f.cooldown, t_sat, cause);
  m.evaluate("verdict-saturating", f.sample, settings(c.verdict_saturating), std::move(saturating),
             f.t, false);

  Observation saturated;
  saturated.context = base;
  saturated.value = f.t_sat_k;
  saturated.judgement = f.state == "saturated" ? Judgement::bad : Judgement::good;
  saturated.message =
      fmt::format("sample {}, cooldown {}: L_phi(T) has saturated{}{}{}", f.sample, f.cooldown, t_sat,
                  l_sat, cause);
  m.evaluate("verdict-saturated", f.sample, settings(c.verdict_saturated), std::move(saturated), f.t,
             false);

  // No verdict on the electrons yet (null: too few plateaus, as early in a
  // new cooldown) is no news either way: a live alert stays until sigma(0)
  // is seen to follow ln T again, since a warm-up and cool-down meant to fix
  // the heating may not have fixed it.
  Observation cooling;
  cooling.context = base;
  cooling.judgement = !f.electrons_cooling ? Judgement::none
                      : *f.electrons_cooling ? Judgement::good
                                             : Judgement::bad;
  cooling.message = fmt::format(
      "sample {}, cooldown {}: the electrons have stopped cooling: sigma(B=0) no longer follows ln T{}",
      f.sample, f.cooldown, t_sat);
  m.evaluate("electrons-not-cooling", f.sample, settings(c.electrons_not_cooling), std::move(cooling),
             f.t, false);
}

void AlertEngine::on_health(const HealthFact& f) {
  Impl& m = *impl_;
  std::lock_guard lock(m.mutex);
  m.flush_pending();
  const AlertConfig& c = m.config;
  const double now = f.now_unix;
  for (const SourceHealth& source : f.sources) {
    auto [it, first] = m.sources.try_emplace(source.name);
    Impl::SourceTrack& track = it->second;
    if (first) {
      // The gaps recorded before the engine saw the source are history; a
      // gap alert live from before the restart waits a full quiet_s.
      track.first_seen = now;
      track.gaps = source.gaps;
      if (m.live.count({"gap", source.name}) != 0) track.last_new_gap = now;
    }

    Observation silent;
    const double since = source.last_arrival_unix.value_or(track.first_seen);
    const double age = now - since;
    silent.value = age;
    silent.context = {{"now", now},
                      {"last_arrival", optional_json(source.last_arrival_unix)},
                      {"silent_s", c.source_silent.silent_s}};
    // Only a reading that arrived is good news: a source not heard from
    // since lphid started (and silent before a restart) is not back yet.
    silent.judgement = age > c.source_silent.silent_s ? Judgement::bad
                       : source.last_arrival_unix     ? Judgement::good
                                                      : Judgement::none;
    silent.message =
        source.last_arrival_unix
            ? fmt::format("source {}: no reading for {:.0f} s (limit {:g} s)", source.name, age,
                          c.source_silent.silent_s)
            : fmt::format("source {}: no reading since lphid started {:.0f} s ago (limit {:g} s)",
                          source.name, age, c.source_silent.silent_s);
    m.evaluate("source-silent", source.name, settings(c.source_silent), std::move(silent), now, true);

    Observation gap;
    if (source.gaps > track.gaps) {
      const std::uint64_t added = source.gaps - track.gaps;
      track.gaps = source.gaps;
      track.last_new_gap = now;
      gap.judgement = Judgement::bad;
      gap.value = static_cast<double>(added);
      gap.context = {{"now", now}, {"new_gaps", added}, {"gaps", source.gaps}};
      gap.message = fmt::format("source {}: {} new gap{} in its sequence numbers ({} in all)",
                                source.name, added, added == 1 ? "" : "s", source.gaps);
      // Each new gap is news: stored and published at once, not throttled.
      m.evaluate("gap", source.name, settings(c.gap), std::move(gap), now, false);
    } else {
      track.gaps = source.gaps;  // a counter that went back (a new database) is the new baseline
      if (track.last_new_gap && now - *track.last_new_gap >= c.gap.quiet_s) {
        gap.judgement = Judgement::good;
        gap.context = {{"now", now}, {"gaps", source.gaps}};
      }
      m.evaluate("gap", source.name, settings(c.gap), std::move(gap), now, true);
    }
  }

  if (f.disk_free_bytes) {
    Observation disk;
    disk.value = *f.disk_free_bytes;
    disk.context = {{"now", now},
                    {"disk_free_bytes", *f.disk_free_bytes},
                    {"min_free_bytes", c.disk_space.min_free_bytes}};
    disk.judgement = below_limit(*f.disk_free_bytes, c.disk_space.min_free_bytes, c.disk_space.hysteresis);
    disk.message = fmt::format("{} free on the data directory's file system (limit {})",
                               format_bytes(*f.disk_free_bytes), format_bytes(c.disk_space.min_free_bytes));
    m.evaluate("disk-space", "", settings(c.disk_space), std::move(disk), now, true);
  }

  Observation lag;
  lag.value = finite(f.writer_lag_s);
  lag.context = {{"now", now}, {"writer_lag_s", optional_json(lag.value)}, {"max_lag_s", c.writer_lag.max_lag_s}};
  lag.judgement = above_limit(f.writer_lag_s, c.writer_lag.max_lag_s, c.writer_lag.hysteresis);
  lag.message = fmt::format("the store writer is {:.1f} s behind the readings (limit {:g} s)",
                            f.writer_lag_s, c.writer_lag.max_lag_s);
  m.evaluate("writer-lag", "", settings(c.writer_lag), std::move(lag), now, true);
}

void AlertEngine::acknowledge(std::int64_t id, double now_unix, std::function<void(const Status&)> done) {
  Impl& m = *impl_;
  std::unique_lock lock(m.mutex);
  m.flush_pending();
  for (auto& [key, s] : m.live) {
    if (s.alert.id != id) continue;
    if (s.alert.state == State::acknowledged) {
      lock.unlock();
      done(Status::success());
      return;
    }
    if (m.writer->failed()) {  // it could not be stored: the alert stays as it is
      lock.unlock();
      done(Status::unavailable("the store writer has failed; the acknowledgement cannot be stored"));
      return;
    }
    s.alert.state = State::acknowledged;
    s.alert.acked_at = now_unix;
    m.persist(s, "acknowledged", now_unix, s.alert.value, json::object(), std::move(done));
    m.announce(s.alert, "acknowledged", true);
    return;
  }
  // Ids are given in order and an alert leaves `live` only when it is
  // cleared: an id below next_id that is not live is a cleared alert.
  const bool cleared = id >= 1 && id < m.next_id;
  lock.unlock();
  if (cleared) {
    done(Status::conflict(fmt::format("alert {} is already cleared", id)));
  } else {
    done(Status::not_found("no alert has id " + std::to_string(id)));
  }
}

Status AlertEngine::acknowledge(std::int64_t id, double now_unix) {
  auto result = std::make_shared<std::promise<Status>>();
  auto future = result->get_future();
  acknowledge(id, now_unix, [result](const Status& s) { result->set_value(s); });
  return future.get();
}

std::vector<Alert> AlertEngine::list(bool all, std::optional<std::string> subject) {
  Impl& m = *impl_;
  std::lock_guard lock(m.mutex);
  m.flush_pending();
  std::vector<Alert> out;
  if (all) {
    if (auto s = m.store.list(true, subject, list_limit, out); s) {
      // The engine's state is the truth: the live ones as they are now (a
      // health alert's row lags its ticks, a new one may not be stored yet),
      // and the cleared ones whose clear is not durable yet.
      std::map<std::int64_t, Alert> now;
      {
        std::lock_guard tracked(m.tracker->mutex);
        for (const auto& [id, a] : m.tracker->clearing) {
          if (!subject || a.subject == *subject) now[id] = a;
        }
      }
      for (const auto& [key, live] : m.live) {
        if (!subject || live.alert.subject == *subject) now[live.alert.id] = live.alert;
      }
      for (Alert& a : out) {
        if (auto it = now.find(a.id); it != now.end()) {
          a = it->second;
          now.erase(it);
        }
      }
      for (auto& [id, a] : now) out.push_back(std::move(a));
      std::sort(out.begin(), out.end(), [](const Alert& a, const Alert& b) { return a.id > b.id; });
      if (out.size() > list_limit) out.resize(list_limit);
      return out;
    } else {
      spdlog::error("alerts: {}", s.message());
    }
    out.clear();  // the live ones below, at least
  }
  for (const auto& [key, s] : m.live) {
    if (!subject || s.alert.subject == *subject) out.push_back(s.alert);
  }
  std::sort(out.begin(), out.end(), [](const Alert& a, const Alert& b) { return a.id > b.id; });
  return out;
}

json AlertEngine::handle_request(const json& request) {
  auto result = std::make_shared<std::promise<json>>();
  auto future = result->get_future();
  handle_request(request, [result](json reply) { result->set_value(std::move(reply)); });
  return future.get();
}

void AlertEngine::handle_request(const json& request, std::function<void(json)> reply) {
  std::optional<std::int64_t> ack;
  json answer = answer_or_ack(request, ack);
  if (!ack) return reply(std::move(answer));
  // The reply's content is decided from the engine's state at once; a reply
  // that changes the alert is sent when the change is durable.
  acknowledge(*ack, wall_now(), [id = *ack, send = std::move(reply)](const Status& s) {
    if (s) return send(json{{"type", "ack"}, {"id", id}, {"state", "acknowledged"}});
    using protocol::Reason;
    const Reason reason = s.code() == StatusCode::not_found || s.code() == StatusCode::conflict
                              ? Reason::value_out_of_range
                              : Reason::storage_error;
    send(protocol::error_message({std::nullopt, reason, s.message()}));
  });
}

// The reply to every request but an acknowledgement, which is left to the
// caller in `ack` (the id) after its keys are checked.
json AlertEngine::answer_or_ack(const json& request, std::optional<std::int64_t>& ack) {
  using protocol::Reason;
  auto error = [](Reason reason, std::string detail) {
    return protocol::error_message({std::nullopt, reason, std::move(detail)});
  };
  if (!request.is_object()) return error(Reason::not_an_object, "a request must be a JSON object");
  const auto type_it = request.find("type");
  if (type_it == request.end()) return error(Reason::missing_field, "the request has no \"type\"");
  if (!type_it->is_string()) return error(Reason::wrong_type, "\"type\" must be a string");
  const std::string type = type_it->get<std::string>();

  if (type == "alerts") {
    bool all = false;
    std::optional<std::string> sample;
    for (const auto& [key, value] : request.items()) {
      if (key == "type") continue;
      if (key == "all") {
        if (!value.is_boolean()) return error(Reason::wrong_type, "\"all\" must be true or false");
        all = value.get<bool>();
      } else if (key == "sample") {
        if (value.is_null()) continue;
        if (!value.is_string()) return error(Reason::wrong_type, "\"sample\" must be a string");
        sample = value.get<std::string>();
      } else {
        return error(Reason::unknown_field, "an alerts request has no key \"" + key + "\"");
      }
    }
    json alerts = json::array();
    for (const Alert& a : list(all, sample)) alerts.push_back(alert_json(a));
    return {{"type", "alerts"}, {"alerts", std::move(alerts)}};
  }

  if (type == "ack") {
    std::optional<std::int64_t> id;
    for (const auto& [key, value] : request.items()) {
      if (key == "type") continue;
      if (key == "id") {
        if (value.is_number_unsigned() && value.get<std::uint64_t>() <= static_cast<std::uint64_t>(INT64_MAX)) {
          id = static_cast<std::int64_t>(value.get<std::uint64_t>());
        } else if (value.is_number_integer()) {
          id = value.get<std::int64_t>();
        } else {
          return error(Reason::wrong_type, "\"id\" must be an integer alert id");
        }
      } else {
        return error(Reason::unknown_field, "an ack request has no key \"" + key + "\"");
      }
    }
    if (!id) return error(Reason::missing_field, "an ack request needs \"id\"");
    ack = *id;
    return json();
  }

  return error(Reason::unknown_type, "the alert engine answers \"alerts\" and \"ack\", not \"" + type + "\"");
}

AlertEngine::Counters AlertEngine::counters() const {
  Impl& m = *impl_;
  Counters out;
  {
    std::lock_guard lock(m.mutex);
    out = m.counters;
    out.store_pending = m.pending.size();
  }
  {
    std::lock_guard lock(m.tracker->mutex);
    out.store_errors += m.tracker->store_errors;
  }
  if (m.hook) {
    const HookRunner::Counters h = m.hook->counters();
    out.hook_runs = h.runs;
    out.hook_failures = h.failures;
    out.hook_timeouts = h.timeouts;
    out.hook_rate_limited = h.rate_limited;
    out.hook_queue_full = h.queue_full;
    out.hook_failed = h.failed_error;
  }
  return out;
}

bool AlertEngine::wait_hook_idle(double timeout_s) {
  return !impl_->hook || impl_->hook->wait_idle(timeout_s);
}

bool AlertEngine::wait_stored(double timeout_s) {
  Impl& m = *impl_;
  const auto deadline =
      std::chrono::steady_clock::now() +
      std::chrono::duration_cast<std::chrono::steady_clock::duration>(std::chrono::duration<double>(timeout_s));
  while (true) {
    bool kept = false;
    {
      std::lock_guard lock(m.mutex);
      m.flush_pending();
      kept = !m.pending.empty();
    }
    std::unique_lock lock(m.tracker->mutex);
    // Kept writes are retried every 10 ms; submitted ones are waited for.
    const auto until = std::min(deadline, std::chrono::steady_clock::now() + std::chrono::milliseconds(10));
    if (m.tracker->settled.wait_until(lock, until, [&] { return !kept && m.tracker->in_flight == 0; })) {
      return true;
    }
    if (std::chrono::steady_clock::now() >= deadline) return false;
  }
}

}  // namespace lphi::alerts
