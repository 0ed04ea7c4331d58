// AlertStore: the alerts and alert_events tables (schema/0004_alerts.sql).
//
// One writer of the database: the AlertStore reads through its own read-only
// connection and never writes on it. Its write_* functions are what the
// alert engine hands to the store writer as WriteJob tasks: they run on the
// writer thread, inside its transaction (in a SAVEPOINT), in queue order.
//
// Thread safety: the reads (load_live, list, find) are used by one thread at
// a time (the engine serialises its calls); the write_* functions hold no
// state and run on whichever thread owns `db` (the store writer's).
#pragma once

#include <cstdint>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "daemon/alerts/alert_engine.hpp"
#include "daemon/store/database.hpp"

namespace lphi::alerts {

// A live alert as stored, with the progress toward its clear.
struct StoredAlert {
  Alert alert;
  std::int64_t good_count = 0;
};

class AlertStore {
 public:
  // Opens a read-only connection to the database. The schema must be there:
  // the store writer applies the migrations when it opens the file.
  static Status open(const std::string& database_path, AlertStore& out);

  // The alerts not cleared, and the highest id ever given (0 for none).
  Status load_live(std::vector<StoredAlert>& out, std::int64_t& max_id);

  // Newest first, at most `limit`.
  Status list(bool all, const std::optional<std::string>& subject, std::size_t limit,
              std::vector<Alert>& out);
  // One alert by id (found = false when there is none).
  Status find(std::int64_t id, bool& found, StoredAlert& out);

  // --- writer tasks: run inside the store writer's transaction -------------

  // Writes the whole alert row (inserted, or updated when its id is stored:
  // a row whose insert was never stored is written whole by its next change)
  // and one alert_events row for `change` with the observation behind it.
  static Status write_change(store::Database& db, const StoredAlert& alert, std::string_view change,
                             double t, double wall_time, std::optional<double> event_value,
                             const nlohmann::json& event_context);
  // Writes only the progress toward the clear (no event).
  static Status write_good_count(store::Database& db, std::int64_t id, std::int64_t good_count);

 private:
  store::Database db_;
};

}  // namespace lphi::alerts
