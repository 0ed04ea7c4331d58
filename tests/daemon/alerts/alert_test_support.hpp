// Shared by the alert tests: an engine on a fresh database in a temp dir,
// writing through a real store writer, and facts with everything fine unless
// a test says otherwise.
#pragma once

#include <sqlite3.h>

#include <memory>
#include <optional>
#include <string>

#include <gtest/gtest.h>

#include "daemon/alerts/alert_engine.hpp"
#include "daemon/store/writer.hpp"
#include "tests/support/temp_dir.hpp"

namespace lphi::alerts::testing {

// An engine and the store writer it writes through, as lphid has them. The
// engine goes first (its kept writes are submitted), then the writer, which
// writes everything queued: once an EngineOnDisk is gone, every change is on
// disk.
struct EngineOnDisk {
  std::unique_ptr<store::StoreWriter> writer;
  std::unique_ptr<AlertEngine> engine;

  AlertEngine* operator->() const { return engine.get(); }
  AlertEngine& operator*() const { return *engine; }
  // Every change so far is durable: for the tests that read the database.
  void settle() const { EXPECT_TRUE(engine->wait_stored(30.0)); }
};

inline EngineOnDisk make_engine(const std::string& db_path, const AlertConfig& config = {},
                                EventPublisher* events = nullptr) {
  EngineOnDisk out;
  const Status w = store::StoreWriter::open(db_path, {}, out.writer);
  EXPECT_TRUE(w.ok()) << w.message();
  if (!w) return out;
  out.writer->start();
  const Status s = AlertEngine::create(config, *out.writer, db_path, events, out.engine);
  EXPECT_TRUE(s.ok()) << s.message();
  return out;
}

// A fit that is fine for the default rules.
inline FitFact good_fit(std::int64_t sweep, double t, std::string sample = "film") {
  FitFact f;
  f.sample = std::move(sample);
  f.sweep_id = sweep;
  f.sweep_index = sweep - 1;  // as lphid stores them: row ids from 1, indices from 0
  f.t = t;
  f.ok = true;
  f.converged = true;
  f.chi2_red = 1.0;
  f.lphi_m = 1e-6;
  f.lphi_err_m = 1e-8;
  f.temperature_k = 0.1;
  return f;
}

inline SweepFact good_sweep(std::int64_t sweep, double t, std::string sample = "film") {
  SweepFact f;
  f.sample = std::move(sample);
  f.sweep_id = sweep;
  f.sweep_index = sweep - 1;
  f.t = t;
  f.temperature_k = 0.1;
  f.temperature_spread_k = 1e-4;
  f.n_points = 400;
  f.max_quadrature_ratio = 0.01;
  f.excitation_ratio = 0.2;
  return f;
}

// A copy of the first alert of `alerts` with that rule (and subject).
inline std::optional<Alert> find_rule(const std::vector<Alert>& alerts, std::string_view rule,
                                      std::string_view subject = "film") {
  for (const Alert& a : alerts) {
    if (a.rule == rule && a.subject == subject) return a;
  }
  return std::nullopt;
}

// One integer from the database, read with SQLite itself.
inline std::int64_t query_int(const std::string& db_path, const std::string& sql) {
  sqlite3* db = nullptr;
  std::int64_t out = -1;
  if (sqlite3_open_v2(db_path.c_str(), &db, SQLITE_OPEN_READONLY, nullptr) == SQLITE_OK) {
    sqlite3_stmt* stmt = nullptr;
    if (sqlite3_prepare_v2(db, sql.c_str(), -1, &stmt, nullptr) == SQLITE_OK &&
        sqlite3_step(stmt) == SQLITE_ROW) {
      out = sqlite3_column_int64(stmt, 0);
    } else {
      ADD_FAILURE() << sql << ": " << sqlite3_errmsg(db);
    }
    sqlite3_finalize(stmt);
  }
  sqlite3_close(db);
  return out;
}

}  // namespace lphi::alerts::testing
