#include "daemon/store/reader.hpp"

#include <sqlite3.h>

namespace lphi::store {

using protocol::SourceKind;

namespace {
constexpr std::size_t chunk_rows = 4096;

std::optional<double> optional_double(const Statement& s, int column) {
  if (s.column_is_null(column)) return std::nullopt;
  return s.column_double(column);
}
}  // namespace

Status StoreReader::open(const std::string& path, StoreReader& out) {
  return Database::open(path, OpenMode::read_only, out.db_);
}

Status StoreReader::sources(std::vector<SourceRow>& out) {
  out.clear();
  Statement s;
  if (auto st = Statement::prepare(db_, "SELECT id, name, kind FROM sources ORDER BY name", s); !st) {
    return st;
  }
  int rc = 0;
  while ((rc = s.step()) == SQLITE_ROW) {
    auto kind = protocol::parse_kind(s.column_text(2));
    if (!kind) return Status::storage(db_.path() + ": source with an unknown kind");
    out.push_back({s.column_int(0), s.column_text(1), *kind});
  }
  if (rc != SQLITE_DONE) return db_.error("listing sources");
  return Status::success();
}

Status StoreReader::find_source(const std::string& name, SourceRow& out, bool& found) {
  found = false;
  Statement s;
  if (auto st = Statement::prepare(db_, "SELECT id, name, kind FROM sources WHERE name = ?", s); !st) {
    return st;
  }
  s.bind(1, std::string_view(name));
  const int rc = s.step();
  if (rc == SQLITE_DONE) return Status::success();
  if (rc != SQLITE_ROW) return db_.error("looking up source " + name);
  auto kind = protocol::parse_kind(s.column_text(2));
  if (!kind) return Status::storage(db_.path() + ": source " + name + " has an unknown kind");
  out = {s.column_int(0), s.column_text(1), *kind};
  found = true;
  return Status::success();
}

Status StoreReader::readings(const SourceRow& source, double from_t, double to_t,
                             const std::function<bool(const protocol::Readings&)>& chunk) {
  std::string sql;
  switch (source.kind) {
    case SourceKind::lockin:
      sql = "SELECT seq, t, x_v, y_v, frequency_hz, range_v, time_constant_s, overload"
            " FROM lockin_readings";
      break;
    case SourceKind::thermometer:
      sql = "SELECT seq, t, temperature_k, resistance_ohm FROM thermometer_readings";
      break;
    case SourceKind::field:
      sql = "SELECT seq, t, field_t FROM field_readings";
      break;
  }
  sql += " WHERE source_id = ? AND t >= ? AND t <= ? ORDER BY t, seq";
  Statement s;
  if (auto st = Statement::prepare(db_, sql, s); !st) return st;
  s.bind(1, source.id);
  // SQLite compares REALs with -inf/+inf correctly, so "all time" needs no special case.
  s.bind(2, from_t);
  s.bind(3, to_t);
  protocol::Readings buffer = protocol::empty_readings(source.kind);
  int rc = 0;
  while ((rc = s.step()) == SQLITE_ROW) {
    switch (source.kind) {
      case SourceKind::lockin: {
        protocol::LockinReading r;
        r.seq = s.column_int(0);
        r.t = s.column_double(1);
        r.x_v = s.column_double(2);
        r.y_v = s.column_double(3);
        r.frequency_hz = optional_double(s, 4);
        r.range_v = optional_double(s, 5);
        r.time_constant_s = optional_double(s, 6);
        if (!s.column_is_null(7)) r.overload = s.column_int(7) != 0;
        std::get<0>(buffer).push_back(r);
        break;
      }
      case SourceKind::thermometer:
        std::get<1>(buffer).push_back(
            {s.column_int(0), s.column_double(1), s.column_double(2), optional_double(s, 3)});
        break;
      case SourceKind::field:
        std::get<2>(buffer).push_back({s.column_int(0), s.column_double(1), s.column_double(2)});
        break;
    }
    if (protocol::reading_count(buffer) >= chunk_rows) {
      if (!chunk(buffer)) return Status::success();
      buffer = protocol::empty_readings(source.kind);
    }
  }
  if (rc != SQLITE_DONE) return db_.error("reading the readings of " + source.name);
  if (protocol::reading_count(buffer) > 0) chunk(buffer);
  return Status::success();
}

Status StoreReader::reading_count(const SourceRow& source, std::int64_t& count) {
  const char* table = source.kind == SourceKind::lockin        ? "lockin_readings"
                      : source.kind == SourceKind::thermometer ? "thermometer_readings"
                                                               : "field_readings";
  Statement s;
  if (auto st = Statement::prepare(
          db_, std::string("SELECT count(*) FROM ") + table + " WHERE source_id = ?", s);
      !st) {
    return st;
  }
  s.bind(1, source.id);
  if (s.step() != SQLITE_ROW) return db_.error("counting readings");
  count = s.column_int(0);
  return Status::success();
}

Status StoreReader::gaps(const SourceRow& source, std::vector<GapRow>& out) {
  out.clear();
  Statement s;
  if (auto st = Statement::prepare(db_,
                                   "SELECT first_seq, last_seq, detected_at FROM gaps"
                                   " WHERE source_id = ? ORDER BY first_seq",
                                   s);
      !st) {
    return st;
  }
  s.bind(1, source.id);
  int rc = 0;
  while ((rc = s.step()) == SQLITE_ROW) {
    out.push_back({s.column_int(0), s.column_int(1), s.column_double(2)});
  }
  if (rc != SQLITE_DONE) return db_.error("reading gaps");
  return Status::success();
}

Status StoreReader::integrity_check(std::string& result) {
  Statement s;
  if (auto st = Statement::prepare(db_, "PRAGMA integrity_check", s); !st) return st;
  result.clear();
  int rc = 0;
  while ((rc = s.step()) == SQLITE_ROW) {
    if (!result.empty()) result += "\n";
    result += s.column_text(0);
  }
  if (rc != SQLITE_DONE) return db_.error("checking integrity");
  return Status::success();
}

}  // namespace lphi::store
