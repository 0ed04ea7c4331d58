// The analysis tables (schema/0003_analysis.sql and later): the one place
// that knows their SQL. The live analysis writes a sample's records and loads
// what an earlier run stored through these functions; the control replies
// read them back through the queries below.
//
// Every function works on the connection it is given and returns a Status
// naming what failed. The write functions run inside a transaction the
// caller owns (the store writer's, or the caller's own BEGIN/COMMIT); they
// never begin or commit. The read functions need only a read-only
// connection. Nothing here keeps state, so any thread may call them on a
// connection it alone uses.
#pragma once

#include <cstdint>
#include <map>
#include <nlohmann/json.hpp>
#include <optional>
#include <string>

#include "daemon/live/sample_pipeline.hpp"
#include "daemon/store/database.hpp"
#include "schema/protocol/reading.hpp"

namespace lphi::store {

// What one sample's analysis finds stored when it starts.
struct StoredAnalysis {
  std::map<std::int64_t, std::int64_t> sweep_ids;  // sweep index -> sweeps.id
  std::int64_t last_sweep_index = -1;               // -1: no sweep stored
  std::map<std::int64_t, live::FitRecord> fits;     // by sweep index
};

// The ids of a registered sample and source (lphid registers them at start).
Status find_sample_id(const Database& db, const std::string& name, std::int64_t& id);
Status find_source_id(const Database& db, const std::string& name, std::int64_t& id);

// The sweeps and fits an earlier run stored for the sample.
Status load_stored_analysis(const Database& db, std::int64_t sample_id, const std::string& sample_name,
                            StoredAnalysis& out);

// Writes one pipeline step's records: sweeps (upserted, their ids added to
// sweep_ids), the fits not taken from the store, sigma(0) of plateaus and
// verdicts. Inside the caller's transaction.
Status write_analysis_records(const Database& db, std::int64_t sample_id, const live::PipelineOutput& out,
                              std::map<std::int64_t, std::int64_t>& sweep_ids);

// The reply elements of the control requests (daemon/PROTOCOL.md): every
// stored sweep or fit, of one sample or (nullopt) of all, by sample name and
// sweep index, as a JSON array.
Status list_sweeps(const Database& db, const std::optional<std::string>& sample, nlohmann::json& out);
Status list_fits(const Database& db, const std::optional<std::string>& sample, nlohmann::json& out);
// The latest verdict of a sample (by event time, then sweep index), or
// nullopt when it has none.
Status latest_verdict(const Database& db, const std::string& sample, std::optional<nlohmann::json>& out);
// The highest committed seq of a source, nullopt when it has no reading.
Status highest_seq(const Database& db, protocol::SourceKind kind, std::int64_t source_id,
                   std::optional<std::int64_t>& out);
// The number of gaps recorded per source name.
Status gap_counts(const Database& db, std::map<std::string, std::uint64_t>& out);

}  // namespace lphi::store
