#include "daemon/alerts/alert_engine.hpp"

#include <algorithm>
#include <chrono>
#include <future>
#include <map>
#include <mutex>
#include <utility>

#include <spdlog/fmt/fmt.h>
#include <spdlog/spdlog.h>

#include "daemon/alerts/alert_rules.hpp"
#include "daemon/alerts/alert_store.hpp"
#include "daemon/alerts/alert_writes.hpp"
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

// How long a re-triggered health alert (judged once a second) waits before
// its updated value is stored and published again.
constexpr double health_update_interval_s = 60.0;

// The list of "all" alerts is bounded.
constexpr std::size_t list_limit = 10000;

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

struct AlertEngine::Impl {
  using Key = std::pair<std::string, std::string>;  // rule, subject

  AlertConfig config;
  AlertStore store;  // reads only
  EventPublisher* events = nullptr;
  std::unique_ptr<HookRunner> hook;
  std::unique_ptr<AlertWrites> writes;  // every store write, in the order of the changes

  std::mutex mutex;
  std::map<Key, StoredAlert> live;
  std::map<Key, double> last_health_update;  // wall time an update was last stored
  HealthRules health_rules;
  std::int64_t next_id = 1;
  Counters counters;

  void persist(const StoredAlert& s, std::string_view change, double t, std::optional<double> value,
               const json& context, std::function<void(const Status&)> done = {}) {
    AlertWrite w;
    w.alert_id = s.alert.id;
    w.what = std::string(change);
    if (s.alert.state == State::cleared) w.cleared = s.alert;
    w.task = [s, what = w.what, t, wall = wall_now(), value, context](store::Database& db) {
      return AlertStore::write_change(db, s, what, t, wall, value, context);
    };
    w.done = std::move(done);
    writes->submit(std::move(w));
  }

  void persist_good_count(std::int64_t id, std::int64_t good_count) {
    AlertWrite w;
    w.alert_id = id;
    w.what = "progress toward the clear";
    w.task = [id, good_count](store::Database& db) { return AlertStore::write_good_count(db, id, good_count); };
    writes->submit(std::move(w));
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

  // The rules' observations go to evaluate(), under `mutex`.
  ObservationSink sink() {
    return [this](std::string_view rule, const std::string& subject, const RuleSettings& rs, Observation obs,
                  double t, bool health) { evaluate(rule, subject, rs, std::move(obs), t, health); };
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
  // The kept writes get their last chance before the hook thread stops.
  std::lock_guard lock(impl_->mutex);
  impl_->writes.reset();
}

Status AlertEngine::create(const AlertConfig& config, store::StoreWriter& writer,
                           const std::string& database_path, EventPublisher* events,
                           std::unique_ptr<AlertEngine>& out) {
  auto impl = std::make_unique<Impl>();
  impl->config = config;
  impl->writes = std::make_unique<AlertWrites>(writer, pending_max);
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
  m.writes->flush();
  judge_fit(m.config, f, m.sink());
}

void AlertEngine::on_sweep(const SweepFact& f) {
  Impl& m = *impl_;
  std::lock_guard lock(m.mutex);
  m.writes->flush();
  judge_sweep(m.config, f, m.sink());
}

void AlertEngine::on_verdict(const VerdictFact& f) {
  Impl& m = *impl_;
  std::lock_guard lock(m.mutex);
  m.writes->flush();
  judge_verdict(m.config, f, m.sink());
}

void AlertEngine::on_health(const HealthFact& f) {
  Impl& m = *impl_;
  std::lock_guard lock(m.mutex);
  m.writes->flush();
  m.health_rules.judge(
      m.config, f, [&m](const std::string& source) { return m.live.count({"gap", source}) != 0; }, m.sink());
}

void AlertEngine::acknowledge(std::int64_t id, double now_unix, std::function<void(const Status&)> done) {
  Impl& m = *impl_;
  std::unique_lock lock(m.mutex);
  m.writes->flush();
  for (auto& [key, s] : m.live) {
    if (s.alert.id != id) continue;
    if (s.alert.state == State::acknowledged) {
      lock.unlock();
      done(Status::success());
      return;
    }
    if (m.writes->writer_failed()) {  // it could not be stored: the alert stays as it is
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
  m.writes->flush();
  std::vector<Alert> out;
  if (all) {
    if (auto s = m.store.list(true, subject, list_limit, out); s) {
      // The engine's state is the truth: the live ones as they are now (a
      // health alert's row lags its ticks, a new one may not be stored yet),
      // and the cleared ones whose clear is not durable yet.
      std::map<std::int64_t, Alert> now;
      for (auto& [id, a] : m.writes->clearing()) {
        if (!subject || a.subject == *subject) now[id] = std::move(a);
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
  }
  const AlertWrites::Counters w = m.writes->counters();
  out.store_errors = w.errors;
  out.store_deferred = w.deferred;
  out.store_dropped = w.dropped;
  out.store_pending = w.kept;
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

bool AlertEngine::wait_stored(double timeout_s) { return impl_->writes->wait_stored(timeout_s); }

}  // namespace lphi::alerts
