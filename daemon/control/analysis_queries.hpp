// AnalysisQueries: the control requests that show the live analysis's
// results: "samples", "sweeps", "fits", "verdict" and "progress"
// (daemon/PROTOCOL.md).
//
// Each request is checked (an optional or required "sample" naming a
// configured sample) and answered from the analysis tables through its own
// read-only connection (store/analysis_tables.hpp), and for "progress" from
// the sample's worker. A request that is wrong gets a protocol error naming
// what was wrong; a database error becomes a storage_error reply.
//
// Thread safety: handle_request from one thread at a time (the control
// thread), concurrently with the analysis's threads.
#pragma once

#include <memory>
#include <nlohmann/json.hpp>
#include <optional>
#include <string>
#include <vector>

#include "daemon/config/config.hpp"
#include "daemon/live/live_analysis.hpp"
#include "daemon/store/database.hpp"

namespace lphi::control {

class AnalysisQueries {
 public:
  // `live` must outlive this object.
  static Status create(const config::Config& config, const std::string& data_dir, const live::LiveAnalysis& live,
                       std::unique_ptr<AnalysisQueries>& out);
  AnalysisQueries(const AnalysisQueries&) = delete;
  AnalysisQueries& operator=(const AnalysisQueries&) = delete;

  // The control request types answered by handle_request.
  static std::vector<std::string> request_types();  // samples, sweeps, fits, verdict, progress
  // {"type": one of request_types(), ...}: the reply (daemon/PROTOCOL.md), or
  // a protocol error naming what was wrong with the request.
  nlohmann::json handle_request(const nlohmann::json& request);

 private:
  AnalysisQueries(const config::Config& config, const live::LiveAnalysis& live);
  std::optional<nlohmann::json> check_sample_key(const nlohmann::json& request, std::optional<std::string>& sample,
                                                 bool required) const;
  nlohmann::json samples_reply() const;
  nlohmann::json sweeps_reply(const nlohmann::json& request);
  nlohmann::json fits_reply(const nlohmann::json& request);
  nlohmann::json verdict_reply(const nlohmann::json& request);
  nlohmann::json progress_reply(const nlohmann::json& request);

  config::Config config_;
  const live::LiveAnalysis& live_;
  store::Database db_;  // read-only
};

}  // namespace lphi::control
