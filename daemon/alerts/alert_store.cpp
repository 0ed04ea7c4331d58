#include "daemon/alerts/alert_store.hpp"

#include <sqlite3.h>

namespace lphi::alerts {

namespace {

using store::Statement;

constexpr const char* select_columns =
    "SELECT id, rule, subject, severity, state, raised_at, acked_at, cleared_at, value, count,"
    " message, context, good_count FROM alerts";

std::optional<double> optional_double(const Statement& s, int column) {
  if (s.column_is_null(column)) return std::nullopt;
  return s.column_double(column);
}

StoredAlert read_row(const Statement& s) {
  StoredAlert out;
  Alert& a = out.alert;
  a.id = s.column_int(0);
  a.rule = s.column_text(1);
  a.subject = s.column_text(2);
  a.severity = parse_severity(s.column_text(3)).value_or(Severity::warning);
  a.state = parse_state(s.column_text(4)).value_or(State::raised);
  a.raised_at = s.column_double(5);
  a.acked_at = optional_double(s, 6);
  a.cleared_at = optional_double(s, 7);
  a.value = optional_double(s, 8);
  a.count = s.column_int(9);
  a.message = s.column_text(10);
  a.context = nlohmann::json::parse(s.column_text(11), nullptr, false);
  if (a.context.is_discarded()) a.context = nlohmann::json::object();
  out.good_count = s.column_int(12);
  return out;
}

}  // namespace

Status AlertStore::open(const std::string& database_path, AlertStore& out) {
  store::Database db;
  if (auto s = store::Database::open(database_path, store::OpenMode::read_only, db); !s) return s;
  out.db_ = std::move(db);
  return Status::success();
}

Status AlertStore::load_live(std::vector<StoredAlert>& out, std::int64_t& max_id) {
  out.clear();
  max_id = 0;
  Statement s;
  if (auto st = Statement::prepare(db_, std::string(select_columns) +
                                             " WHERE state != 'cleared' ORDER BY id", s);
      !st) {
    return st;
  }
  int rc = 0;
  while ((rc = s.step()) == SQLITE_ROW) out.push_back(read_row(s));
  if (rc != SQLITE_DONE) return db_.error("loading the live alerts");
  Statement m;
  if (auto st = Statement::prepare(db_, "SELECT COALESCE(MAX(id), 0) FROM alerts", m); !st) return st;
  if (m.step() != SQLITE_ROW) return db_.error("reading the highest alert id");
  max_id = m.column_int(0);
  return Status::success();
}

Status AlertStore::write_change(store::Database& db, const StoredAlert& stored, std::string_view change,
                                double t, double wall_time, std::optional<double> event_value,
                                const nlohmann::json& event_context) {
  const Alert& a = stored.alert;
  Statement row;
  if (auto s = Statement::prepare(
          db,
          "INSERT INTO alerts (rule, subject, severity, state, raised_at, acked_at, cleared_at,"
          " value, count, message, context, good_count, id)"
          " VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11, ?12, ?13)"
          " ON CONFLICT (id) DO UPDATE SET rule = ?1, subject = ?2, severity = ?3, state = ?4,"
          " raised_at = ?5, acked_at = ?6, cleared_at = ?7, value = ?8, count = ?9, message = ?10,"
          " context = ?11, good_count = ?12",
          row);
      !s) {
    return s;
  }
  const std::string context = a.context.dump(-1, ' ', false, nlohmann::json::error_handler_t::replace);
  row.bind(1, a.rule);
  row.bind(2, a.subject);
  row.bind(3, severity_name(a.severity));
  row.bind(4, state_name(a.state));
  row.bind(5, a.raised_at);
  row.bind_optional(6, a.acked_at);
  row.bind_optional(7, a.cleared_at);
  row.bind_optional(8, a.value);
  row.bind(9, a.count);
  row.bind(10, a.message);
  row.bind(11, context);
  row.bind(12, stored.good_count);
  row.bind(13, a.id);
  if (row.step() != SQLITE_DONE) return db.error("storing alert " + std::to_string(a.id));

  Statement event;
  if (auto s = Statement::prepare(db,
                                  "INSERT INTO alert_events (alert_id, change, t, wall_time, value, context)"
                                  " VALUES (?1, ?2, ?3, ?4, ?5, ?6)",
                                  event);
      !s) {
    return s;
  }
  event.bind(1, a.id);
  event.bind(2, change);
  event.bind(3, t);
  event.bind(4, wall_time);
  event.bind_optional(5, event_value);
  event.bind(6, event_context.dump(-1, ' ', false, nlohmann::json::error_handler_t::replace));
  if (event.step() != SQLITE_DONE) return db.error("storing a change of alert " + std::to_string(a.id));
  return Status::success();
}

Status AlertStore::write_good_count(store::Database& db, std::int64_t id, std::int64_t good_count) {
  Statement s;
  if (auto st = Statement::prepare(db, "UPDATE alerts SET good_count = ?1 WHERE id = ?2", s); !st) {
    return st;
  }
  s.bind(1, good_count);
  s.bind(2, id);
  if (s.step() != SQLITE_DONE) return db.error("storing the progress of alert " + std::to_string(id));
  return Status::success();
}

Status AlertStore::list(bool all, const std::optional<std::string>& subject, std::size_t limit,
                        std::vector<Alert>& out) {
  out.clear();
  std::string sql = select_columns;
  sql += " WHERE (?1 OR state != 'cleared') AND (?2 IS NULL OR subject = ?2) ORDER BY id DESC LIMIT ?3";
  Statement s;
  if (auto st = Statement::prepare(db_, sql, s); !st) return st;
  s.bind(1, std::int64_t{all ? 1 : 0});
  s.bind_optional(2, subject);
  s.bind(3, static_cast<std::int64_t>(limit));
  int rc = 0;
  while ((rc = s.step()) == SQLITE_ROW) out.push_back(read_row(s).alert);
  if (rc != SQLITE_DONE) return db_.error("listing the alerts");
  return Status::success();
}

Status AlertStore::find(std::int64_t id, bool& found, StoredAlert& out) {
  found = false;
  Statement s;
  if (auto st = Statement::prepare(db_, std::string(select_columns) + " WHERE id = ?1", s); !st) {
    return st;
  }
  s.bind(1, id);
  const int rc = s.step();
  if (rc == SQLITE_ROW) {
    out = read_row(s);
    found = true;
    return Status::success();
  }
  if (rc != SQLITE_DONE) return db_.error("finding alert " + std::to_string(id));
  return Status::success();
}

}  // namespace lphi::alerts
