// StoreReader: a read-only view of lphi's database for anyone but the writer
// (the control socket, `lphi export`, the analysis pipeline). Each reader owns
// its own read-only connection; WAL lets it run beside the writer and see
// every committed transaction. One StoreReader is used by one thread at a time.
#pragma once

#include <functional>
#include <limits>
#include <optional>
#include <string>
#include <vector>

#include "schema/protocol/reading.hpp"
#include "daemon/store/database.hpp"

namespace lphi::store {

struct SourceRow {
  std::int64_t id = 0;
  std::string name;
  protocol::SourceKind kind = protocol::SourceKind::lockin;
};

struct GapRow {
  std::int64_t first_seq = 0, last_seq = 0;
  double detected_at = 0.0;
};

class StoreReader {
 public:
  static Status open(const std::string& path, StoreReader& out);

  Status sources(std::vector<SourceRow>& out);
  // found is false (and the status ok) when there is no such source.
  Status find_source(const std::string& name, SourceRow& out, bool& found);

  // Calls `chunk` with the source's readings whose t lies in [from_t, to_t],
  // in increasing t, a few thousand at a time (so an export needs no memory
  // in proportion to its size). A chunk callback returning false stops early.
  Status readings(const SourceRow& source, double from_t, double to_t,
                  const std::function<bool(const protocol::Readings&)>& chunk);

  Status reading_count(const SourceRow& source, std::int64_t& count);
  Status gaps(const SourceRow& source, std::vector<GapRow>& out);
  Status integrity_check(std::string& result);

  Database& database() { return db_; }

 private:
  Database db_;
};

inline constexpr double all_time_from = -std::numeric_limits<double>::infinity();
inline constexpr double all_time_to = std::numeric_limits<double>::infinity();

}  // namespace lphi::store
