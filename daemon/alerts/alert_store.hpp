// AlertStore: the alerts and alert_events tables (schema/0004_alerts.sql)
// through the alert engine's own connection. Used by one thread at a time
// (the engine serialises its calls).
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
  // Opens (creating if needed) the database and applies pending migrations.
  static Status open(const std::string& database_path, AlertStore& out);

  // The alerts not cleared, and the highest id ever given (0 for none).
  Status load_live(std::vector<StoredAlert>& out, std::int64_t& max_id);

  // Writes the alert row (inserted when `is_new`) and one alert_events row
  // for `change` with the observation behind it, in one transaction.
  Status record(const StoredAlert& alert, bool is_new, std::string_view change, double t,
                       double wall_time, std::optional<double> event_value,
                       const nlohmann::json& event_context);
  // Writes only the progress toward the clear (no event).
  Status record_good_count(std::int64_t id, std::int64_t good_count);

  // Newest first, at most `limit`.
  Status list(bool all, const std::optional<std::string>& subject, std::size_t limit,
                     std::vector<Alert>& out);
  // One alert by id (found = false when there is none).
  Status find(std::int64_t id, bool& found, StoredAlert& out);

 private:
  store::Database db_;
};

}  // namespace lphi::alerts
