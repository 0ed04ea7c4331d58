#include "daemon/control/analysis_queries.hpp"

#include "daemon/store/analysis_tables.hpp"
#include "schema/protocol/codec.hpp"
#include "schema/result_json.hpp"

namespace lphi::control {

using nlohmann::json;
using protocol::Reason;

namespace {

json error_reply(Reason reason, std::string detail) {
  return protocol::error_message({std::nullopt, reason, std::move(detail)});
}

}  // namespace

AnalysisQueries::AnalysisQueries(const config::Config& config, const live::LiveAnalysis& live)
    : config_(config), live_(live) {}

Status AnalysisQueries::create(const config::Config& config, const std::string& data_dir,
                               const live::LiveAnalysis& live, std::unique_ptr<AnalysisQueries>& out) {
  std::unique_ptr<AnalysisQueries> q(new AnalysisQueries(config, live));
  if (auto s = store::Database::open(store::database_path(data_dir), store::OpenMode::read_only, q->db_); !s) {
    return s;
  }
  out = std::move(q);
  return Status::success();
}

std::vector<std::string> AnalysisQueries::request_types() {
  return {"samples", "sweeps", "fits", "verdict", "progress"};
}

json AnalysisQueries::handle_request(const json& request) {
  const std::string type = request.value("type", "");
  if (type == "samples") return samples_reply();
  if (type == "sweeps") return sweeps_reply(request);
  if (type == "fits") return fits_reply(request);
  if (type == "verdict") return verdict_reply(request);
  if (type == "progress") return progress_reply(request);
  return error_reply(Reason::unknown_type, "the analysis does not answer \"" + type + "\"");
}

// An optional "sample" key: absent, or the name of a configured sample.
std::optional<json> AnalysisQueries::check_sample_key(const json& request, std::optional<std::string>& sample,
                                                      bool required) const {
  auto it = request.find("sample");
  if (it == request.end() || it->is_null()) {
    if (required) return error_reply(Reason::missing_field, "the request needs \"sample\": a sample's name");
    return std::nullopt;
  }
  if (!it->is_string()) return error_reply(Reason::wrong_type, "\"sample\" must be a string");
  const std::string name = it->get<std::string>();
  for (const auto& s : config_.samples) {
    if (s.name == name) {
      sample = name;
      return std::nullopt;
    }
  }
  return error_reply(Reason::unknown_source, "no sample is named \"" + name + "\"");
}

json AnalysisQueries::samples_reply() const {
  json samples = json::array();
  for (const auto& s : config_.samples) {
    samples.push_back({{"name", s.name},
                       {"model", s.model},
                       {"lockin", s.lockin},
                       {"thermometer", s.thermometer},
                       {"field", s.field},
                       {"squares", s.squares},
                       {"width_m", s.width_m},
                       {"thickness_m", s.thickness_m},
                       {"excitation_a", s.excitation_a},
                       {"gain", schema::optional_json(s.gain)},
                       {"combine_up_down", s.combine_up_down}});
  }
  return {{"type", "samples"}, {"samples", std::move(samples)}};
}

json AnalysisQueries::sweeps_reply(const json& request) {
  std::optional<std::string> sample;
  if (auto bad = check_sample_key(request, sample, false)) return *bad;
  json sweeps;
  if (auto s = store::list_sweeps(db_, sample, sweeps); !s) return error_reply(Reason::storage_error, s.message());
  return {{"type", "sweeps"}, {"sweeps", std::move(sweeps)}};
}

json AnalysisQueries::fits_reply(const json& request) {
  std::optional<std::string> sample;
  if (auto bad = check_sample_key(request, sample, false)) return *bad;
  json fits;
  if (auto s = store::list_fits(db_, sample, fits); !s) return error_reply(Reason::storage_error, s.message());
  return {{"type", "fits"}, {"fits", std::move(fits)}};
}

json AnalysisQueries::verdict_reply(const json& request) {
  std::optional<std::string> sample;
  if (auto bad = check_sample_key(request, sample, false)) return *bad;
  json verdicts = json::array();
  for (const auto& s : config_.samples) {
    if (sample && *sample != s.name) continue;
    std::optional<json> stored;
    if (auto st = store::latest_verdict(db_, s.name, stored); !st) {
      return error_reply(Reason::storage_error, st.message());
    }
    json j = stored ? std::move(*stored) : live::no_data_verdict_json();
    j["sample"] = s.name;
    verdicts.push_back(std::move(j));
  }
  return {{"type", "verdict"}, {"verdicts", std::move(verdicts)}};
}

json AnalysisQueries::progress_reply(const json& request) {
  std::optional<std::string> sample;
  if (auto bad = check_sample_key(request, sample, true)) return *bad;
  const live::SampleWorker* w = live_.find(*sample);
  if (w == nullptr) return error_reply(Reason::unknown_source, "no sample is named \"" + *sample + "\"");
  const live::SampleProgress p = w->progress();
  static const protocol::SourceKind kinds[3] = {protocol::SourceKind::lockin, protocol::SourceKind::thermometer,
                                                protocol::SourceKind::field};
  json sources = json::array();
  bool idle = !p.busy && p.error.empty() && p.started;
  for (int k = 0; k < 3; ++k) {
    std::optional<std::int64_t> committed;
    if (auto s = store::highest_seq(db_, kinds[k], w->source_id(k), committed); !s) {
      return error_reply(Reason::storage_error, s.message());
    }
    if (committed && *committed > p.analysed_seq[k]) idle = false;
    sources.push_back({{"name", w->source_name(k)},
                       {"kind", protocol::kind_name(kinds[k])},
                       {"committed_seq", committed ? json(*committed) : json(nullptr)},
                       {"analysed_seq", p.analysed_seq[k] >= 0 ? json(p.analysed_seq[k]) : json(nullptr)}});
  }
  json reply = {{"type", "progress"},  {"sample", *sample},  {"sources", std::move(sources)},
                {"idle", idle},        {"sweeps", p.sweeps}, {"fits", p.fits},
                {"fits_reused", p.fits_reused}};
  // A stream the others wait for (silent, or behind by more than the
  // aligner tolerates): the analysis resumes when it catches up.
  reply["waiting_for"] = p.waiting_for >= 0 ? json(w->source_name(p.waiting_for)) : json(nullptr);
  if (!p.error.empty()) reply["error"] = p.error;
  // What was dropped, by reason, and why there are no sweeps (if so).
  const json counts = health::sample_counts_json(p.counts);
  reply["dropped"] = counts["dropped"];
  reply["no_sweeps_reason"] = counts["no_sweeps_reason"];
  return reply;
}

}  // namespace lphi::control
