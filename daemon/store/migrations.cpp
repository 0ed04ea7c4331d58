#include "daemon/store/migrations.hpp"

#include <sqlite3.h>

#include <string>

namespace lphi::store {

Status read_schema_version(const Database& db, int& version) {
  version = 0;
  Statement exists;
  if (auto s = Statement::prepare(
          db, "SELECT count(*) FROM sqlite_master WHERE type='table' AND name='schema_version'",
          exists);
      !s) {
    return s;
  }
  if (exists.step() != SQLITE_ROW) return db.error("reading sqlite_master");
  if (exists.column_int(0) == 0) return Status::success();
  Statement max;
  if (auto s = Statement::prepare(db, "SELECT coalesce(max(version), 0) FROM schema_version", max);
      !s) {
    return s;
  }
  if (max.step() != SQLITE_ROW) return db.error("reading schema_version");
  version = static_cast<int>(max.column_int(0));
  return Status::success();
}

Status apply_migrations(Database& db, std::span<const Migration> migrations, int* applied) {
  if (applied != nullptr) *applied = 0;
  for (std::size_t i = 0; i < migrations.size(); ++i) {
    if (migrations[i].version != static_cast<int>(i) + 1) {
      return Status::internal("schema migrations must be numbered 1, 2, 3, ... without holes; " +
                             std::string(migrations[i].name) + " is out of place");
    }
  }
  // IMMEDIATE takes the write lock first, so two processes cannot both decide
  // that a migration is pending.
  if (auto s = db.exec("BEGIN IMMEDIATE"); !s) return s;
  auto fail = [&](Status s) {
    (void)db.exec("ROLLBACK");
    return s;
  };
  int version = 0;
  if (auto s = read_schema_version(db, version); !s) return fail(s);
  const int latest = latest_version(migrations);
  if (version > latest) {
    return fail(Status::conflict(
        "the database " + db.path() + " has schema version " + std::to_string(version) +
        ", newer than this lphid understands (" + std::to_string(latest) +
        "); run a newer lphid, or restore a backup made for this version"));
  }
  if (auto s = db.exec("CREATE TABLE IF NOT EXISTS schema_version ("
                       " version INTEGER PRIMARY KEY,"
                       " name TEXT NOT NULL,"
                       " applied_at TEXT NOT NULL DEFAULT (strftime('%Y-%m-%dT%H:%M:%fZ', 'now')))");
      !s) {
    return fail(s);
  }
  int count = 0;
  for (const auto& m : migrations) {
    if (m.version <= version) continue;
    if (auto s = db.exec(m.sql); !s) {
      return fail(Status::storage("schema migration " + std::string(m.name) + " failed: " + s.message()));
    }
    Statement record;
    if (auto s = Statement::prepare(db, "INSERT INTO schema_version (version, name) VALUES (?, ?)",
                                    record);
        !s) {
      return fail(s);
    }
    record.bind(1, std::int64_t{m.version});
    record.bind(2, std::string_view(m.name));
    if (record.step() != SQLITE_DONE) return fail(db.error("recording the schema version"));
    ++count;
  }
  if (auto s = db.exec("COMMIT"); !s) return fail(s);
  if (applied != nullptr) *applied = count;
  return Status::success();
}

}  // namespace lphi::store
