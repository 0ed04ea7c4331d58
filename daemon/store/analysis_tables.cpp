#include "daemon/store/analysis_tables.hpp"

#include <sqlite3.h>

#include <cmath>
#include <limits>

#include "analysis/segmenter.hpp"

namespace lphi::store {

using nlohmann::json;
using live::PipelineOutput;

namespace {

json null_or(const Statement& st, int column) {
  return st.column_is_null(column) ? json(nullptr) : json(st.column_double(column));
}

// A value to store: NULL for an absent or non-finite number.
template <class T>
std::optional<double> finite(const std::optional<T>& v) {
  if (v && std::isfinite(*v)) return static_cast<double>(*v);
  return std::nullopt;
}
std::optional<double> finite(double v) { return finite(std::optional<double>(v)); }

// Runs the query `sql` with ?1 bound to `sample` (NULL for every sample) and
// hands each row to on_row; `what` names the failure.
template <class OnRow>
Status select_each(const Database& db, std::string_view sql, const std::optional<std::string>& sample,
                   const std::string& what, OnRow on_row) {
  Statement st;
  if (auto s = Statement::prepare(db, sql, st); !s) return s;
  st.bind_optional(1, sample);
  int rc = 0;
  while ((rc = st.step()) == SQLITE_ROW) on_row(st);
  if (rc != SQLITE_DONE) return db.error(what);
  return Status::success();
}

// Runs the insert `sql` once for each element of `rows` that bind_row binds
// (it returns false to skip one), stopping at the first failure, which
// what_failed(row) names.
template <class Rows, class BindRow, class WhatFailed>
Status insert_each(const Database& db, std::string_view sql, const std::string& statement, const Rows& rows,
                   BindRow bind_row, WhatFailed what_failed) {
  if (std::empty(rows)) return Status::success();
  Statement st;
  if (!Statement::prepare(db, sql, st)) return db.error("preparing the " + statement);
  for (const auto& row : rows) {
    st.reset();
    if (!bind_row(st, row)) continue;
    if (st.step() != SQLITE_DONE) return db.error(what_failed(row));
  }
  return Status::success();
}


std::vector<std::string> string_array(const std::string& text) {
  std::vector<std::string> out;
  auto j = json::parse(text, nullptr, false);
  if (!j.is_array()) return out;
  for (const auto& e : j) {
    if (e.is_string()) out.push_back(e.get<std::string>());
  }
  return out;
}

Status find_id(const Database& db, const char* sql, const std::string& name, const std::string& what,
               std::int64_t& id) {
  Statement st;
  if (auto s = Statement::prepare(db, sql, st); !s) return s;
  st.bind(1, name);
  const int rc = st.step();
  if (rc == SQLITE_ROW) {
    id = st.column_int(0);
    return Status::success();
  }
  if (rc != SQLITE_DONE) return db.error("looking up " + what);
  return Status::not_found(what + " is not registered");
}

live::FitRecord read_fit(const Statement& fits) {
  live::FitRecord f;
  f.sweep_index = fits.column_int(0);
  f.ok = fits.column_int(1) != 0;
  f.error = fits.column_text(2);
  f.model = fits.column_text(3);
  f.lphi_m = fits.column_is_null(4) ? 0.0 : fits.column_double(4);
  f.lphi_err_m = fits.column_is_null(5) ? 0.0 : fits.column_double(5);
  f.chi2_red = fits.column_is_null(6) ? 0.0 : fits.column_double(6);
  f.converged = fits.column_int(7) != 0;
  f.flags = string_array(fits.column_text(8));
  if (!fits.column_is_null(9)) f.sigma0_s = fits.column_double(9);
  if (!fits.column_is_null(10)) f.sigma0_err_s = fits.column_double(10);
  f.used_in_dephasing = fits.column_int(11) != 0;
  f.quality = string_array(fits.column_text(12));
  f.result = json::parse(fits.column_text(13), nullptr, false);
  if (f.result.is_discarded()) f.result = json::object();
  f.t_s = fits.column_double(14);
  return f;
}

Status write_sweeps(const Database& db, std::int64_t sample_id, const PipelineOutput& out,
                    std::map<std::int64_t, std::int64_t>& sweep_ids) {
  if (out.sweeps.empty()) return Status::success();
  Statement st;
  if (!Statement::prepare(
           db,
           // An upsert keeps the row's id (fits refer to it); a sweep found
           // again after a restart is rewritten with what it is now.
           "INSERT INTO sweeps (sample_id, sweep_index, direction, t_start, t_end, field_min_t,"
           " field_max_t, n_points, temperature_k, temperature_spread_k, temperature_min_k, temperature_max_k,"
           " temperature_run, temperature_unstable, truncated, n_overload, max_quadrature_ratio,"
           " sample_voltage_v, excitation_ratio, cooldown)"
           " VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11, ?12, ?13, ?14, ?15, ?16, ?17, ?18, ?19, ?20)"
           " ON CONFLICT (sample_id, sweep_index) DO UPDATE SET direction = excluded.direction,"
           " t_start = excluded.t_start, t_end = excluded.t_end, field_min_t = excluded.field_min_t,"
           " field_max_t = excluded.field_max_t, n_points = excluded.n_points,"
           " temperature_k = excluded.temperature_k, temperature_spread_k = excluded.temperature_spread_k,"
           " temperature_min_k = excluded.temperature_min_k, temperature_max_k = excluded.temperature_max_k,"
           " temperature_run = excluded.temperature_run, temperature_unstable = excluded.temperature_unstable,"
           " truncated = excluded.truncated, n_overload = excluded.n_overload,"
           " max_quadrature_ratio = excluded.max_quadrature_ratio, sample_voltage_v = excluded.sample_voltage_v,"
           " excitation_ratio = excluded.excitation_ratio, cooldown = excluded.cooldown",
           st)) {
    return db.error("preparing the sweep insert");
  }
  Statement id;
  if (!Statement::prepare(db, "SELECT id FROM sweeps WHERE sample_id = ?1 AND sweep_index = ?2", id)) {
    return db.error("preparing the sweep lookup");
  }
  for (const auto& s : out.sweeps) {
    // |Y/X| is infinite for X = 0: stored as the largest double.
    const double quadrature_ratio = std::isfinite(s.max_quadrature_ratio) ? s.max_quadrature_ratio
                                                                          : std::numeric_limits<double>::max();
    st.reset();
    st.bind_all(sample_id, s.index, segment::direction_name(s.direction), s.t_start_s, s.t_end_s,
                s.field_min_t, s.field_max_t, s.n_points, s.temperature.mean_k, s.temperature.std_k,
                s.temperature.min_k, s.temperature.max_k, s.temperature_run, s.temperature_unstable,
                s.truncated, s.n_overload, quadrature_ratio, s.sample_voltage_v, finite(s.excitation_ratio),
                s.cooldown);
    if (st.step() != SQLITE_DONE) return db.error("storing sweep " + std::to_string(s.index));
    id.reset();
    id.bind_all(sample_id, s.index);
    if (id.step() != SQLITE_ROW) return db.error("finding sweep " + std::to_string(s.index));
    sweep_ids[s.index] = id.column_int(0);
  }
  return Status::success();
}

Status write_fits(const Database& db, std::int64_t sample_id, const PipelineOutput& out,
                  const std::map<std::int64_t, std::int64_t>& sweep_ids) {
  bool new_fits = false;
  for (const auto& f : out.fits) new_fits = new_fits || !f.from_store;
  if (!new_fits) return Status::success();
  return insert_each(
      db,
      "INSERT OR REPLACE INTO fits (sweep_id, sample_id, combined_with, ok, error, model, lphi_m, lphi_err_m,"
      " chi2_red, converged, flags_json, temperature_k, temperature_spread_k, sigma0_s, sigma0_err_s,"
      " used_in_dephasing, quality_json, result_json, t, cooldown)"
      " VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11, ?12, ?13, ?14, ?15, ?16, ?17, ?18, ?19, ?20)",
      "fit insert", out.fits,
      [&](Statement& st, const live::FitRecord& f) {
        if (f.from_store) return false;
        std::optional<std::int64_t> combined_with;
        if (f.combined_with) combined_with = sweep_ids.at(*f.combined_with);
        st.bind_all(sweep_ids.at(f.sweep_index), sample_id, combined_with, f.ok, f.error, f.model,
                    finite(f.lphi_m), finite(f.lphi_err_m), finite(f.chi2_red), f.converged, json(f.flags).dump(),
                    f.temperature_k, f.temperature_spread_k, finite(f.sigma0_s), finite(f.sigma0_err_s),
                    f.used_in_dephasing, json(f.quality).dump(), f.result.dump(), f.t_s, f.cooldown);
        return true;
      },
      [](const live::FitRecord& f) { return "storing the fit of sweep " + std::to_string(f.sweep_index); });
}

Status write_zero_field(const Database& db, std::int64_t sample_id, const PipelineOutput& out) {
  return insert_each(
      db,
      "INSERT OR REPLACE INTO zero_field_points (sample_id, temperature_run, temperature_k, sigma_s,"
      " sigma_err_s, n_sweeps, t, cooldown) VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8)",
      "zero-field insert", out.zero_field,
      [&](Statement& st, const live::ZeroFieldRecord& z) {
        st.bind_all(sample_id, z.temperature_run, z.temperature_k, z.sigma_s, z.sigma_err_s, z.n_sweeps, z.t_s,
                    z.cooldown);
        return true;
      },
      [](const live::ZeroFieldRecord&) { return std::string("storing sigma(0) of a plateau"); });
}

Status write_verdicts(const Database& db, std::int64_t sample_id, const PipelineOutput& out) {
  return insert_each(
      db,
      "INSERT OR REPLACE INTO verdicts (sample_id, sweep_index, t, state, electrons_cooling, likely_cause,"
      " exponent_p, lphi_sat_m, t_sat_k, n_points, verdict_json, cooldown)"
      " VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11, ?12)",
      "verdict insert", out.verdicts,
      [&](Statement& st, const live::VerdictRecord& v) {
        st.bind_all(sample_id, v.sweep_index, v.t_s, v.state, v.electrons_cooling, v.likely_cause,
                    finite(v.exponent_p), finite(v.lphi_sat_m), finite(v.t_sat_k), v.n_points, v.json.dump(),
                    v.cooldown);
        return true;
      },
      [](const live::VerdictRecord&) { return std::string("storing the verdict"); });
}

}  // namespace

Status find_sample_id(const Database& db, const std::string& name, std::int64_t& id) {
  return find_id(db, "SELECT id FROM samples WHERE name = ?1", name, "sample " + name, id);
}

Status find_source_id(const Database& db, const std::string& name, std::int64_t& id) {
  return find_id(db, "SELECT id FROM sources WHERE name = ?1", name, "source " + name, id);
}

Status load_stored_analysis(const Database& db, std::int64_t sample_id, const std::string& sample_name,
                            StoredAnalysis& out) {
  Statement st;
  if (auto s = Statement::prepare(db, "SELECT sweep_index, id FROM sweeps WHERE sample_id = ?1", st); !s) {
    return s;
  }
  st.bind(1, sample_id);
  int rc = 0;
  while ((rc = st.step()) == SQLITE_ROW) {
    const std::int64_t index = st.column_int(0);
    out.sweep_ids[index] = st.column_int(1);
    out.last_sweep_index = std::max(out.last_sweep_index, index);
  }
  if (rc != SQLITE_DONE) return db.error("reading the stored sweeps of " + sample_name);
  Statement fits;
  if (auto s = Statement::prepare(
          db,
          "SELECT sw.sweep_index, f.ok, f.error, f.model, f.lphi_m, f.lphi_err_m, f.chi2_red, f.converged,"
          " f.flags_json, f.sigma0_s, f.sigma0_err_s, f.used_in_dephasing, f.quality_json, f.result_json, f.t"
          " FROM fits f JOIN sweeps sw ON sw.id = f.sweep_id WHERE f.sample_id = ?1",
          fits);
      !s) {
    return s;
  }
  fits.bind(1, sample_id);
  while ((rc = fits.step()) == SQLITE_ROW) {
    live::FitRecord f = read_fit(fits);
    out.fits[f.sweep_index] = std::move(f);
  }
  if (rc != SQLITE_DONE) return db.error("reading the stored fits of " + sample_name);
  return Status::success();
}

Status write_analysis_records(const Database& db, std::int64_t sample_id, const PipelineOutput& out,
                              std::map<std::int64_t, std::int64_t>& sweep_ids) {
  if (auto s = write_sweeps(db, sample_id, out, sweep_ids); !s) return s;
  if (auto s = write_fits(db, sample_id, out, sweep_ids); !s) return s;
  if (auto s = write_zero_field(db, sample_id, out); !s) return s;
  return write_verdicts(db, sample_id, out);
}

Status list_sweeps(const Database& db, const std::optional<std::string>& sample, json& out) {
  out = json::array();
  return select_each(
      db,
      "SELECT s.id, sm.name, s.sweep_index, s.direction, s.t_start, s.t_end, s.field_min_t, s.field_max_t,"
      " s.n_points, s.temperature_k, s.temperature_spread_k, s.temperature_unstable, s.truncated,"
      " s.n_overload, s.max_quadrature_ratio, s.excitation_ratio,"
      " EXISTS (SELECT 1 FROM fits f WHERE f.sweep_id = s.id OR f.combined_with = s.id), s.cooldown,"
      // The field axis and the advice of the sweep's own fit (not of a
      // combined fit that it is the earlier sweep of), from its result JSON.
      " (SELECT json_extract(f.result_json, '$.field_offset_t') FROM fits f WHERE f.sweep_id = s.id),"
      " (SELECT json_extract(f.result_json, '$.field_offset_err_t') FROM fits f WHERE f.sweep_id = s.id),"
      " (SELECT json_extract(f.result_json, '$.advice') FROM fits f WHERE f.sweep_id = s.id)"
      " FROM sweeps s JOIN samples sm ON sm.id = s.sample_id"
      " WHERE ?1 IS NULL OR sm.name = ?1 ORDER BY sm.name, s.sweep_index",
      sample, "listing sweeps", [&](const Statement& st) {
        out.push_back({{"sweep_id", st.column_int(0)},
                       {"sample", st.column_text(1)},
                       {"index", st.column_int(2)},
                       {"direction", st.column_text(3)},
                       {"t_start", st.column_double(4)},
                       {"t_end", st.column_double(5)},
                       {"field_min_t", st.column_double(6)},
                       {"field_max_t", st.column_double(7)},
                       {"n_points", st.column_int(8)},
                       {"temperature_k", st.column_double(9)},
                       {"temperature_spread_k", st.column_double(10)},
                       {"temperature_unstable", st.column_int(11) != 0},
                       {"truncated", st.column_int(12) != 0},
                       {"n_overload", st.column_int(13)},
                       {"max_quadrature_ratio", st.column_double(14)},
                       {"excitation_ratio", null_or(st, 15)},
                       {"fitted", st.column_int(16) != 0},
                       {"cooldown", st.column_int(17)},
                       {"field_offset_t", null_or(st, 18)},
                       {"field_offset_err_t", null_or(st, 19)},
                       {"advice", st.column_is_null(20) ? json("") : json(st.column_text(20))}});
      });
}

Status list_fits(const Database& db, const std::optional<std::string>& sample, json& out) {
  out = json::array();
  return select_each(
      db,
      "SELECT f.sweep_id, sm.name, s.sweep_index, f.result_json, f.temperature_k, f.temperature_spread_k,"
      " COALESCE(c.t_start, s.t_start), s.t_end, f.ok, f.error, f.used_in_dephasing, f.quality_json,"
      " c.sweep_index, f.cooldown"
      " FROM fits f JOIN sweeps s ON s.id = f.sweep_id JOIN samples sm ON sm.id = f.sample_id"
      " LEFT JOIN sweeps c ON c.id = f.combined_with"
      " WHERE ?1 IS NULL OR sm.name = ?1 ORDER BY sm.name, s.sweep_index",
      sample, "listing fits", [&](const Statement& st) {
        json j = json::parse(st.column_text(3), nullptr, false);
        if (!j.is_object()) j = json::object();
        j["sweep_id"] = st.column_int(0);
        j["sample"] = st.column_text(1);
        j["sweep_index"] = st.column_int(2);
        j["temperature_k"] = st.column_double(4);
        j["temperature_spread_k"] = st.column_double(5);
        j["t_start"] = st.column_double(6);
        j["t_end"] = st.column_double(7);
        j["ok"] = st.column_int(8) != 0;
        j["error"] = st.column_text(9);
        j["used_in_dephasing"] = st.column_int(10) != 0;
        j["quality"] = json::parse(st.column_text(11), nullptr, false);
        j["combined_with"] = st.column_is_null(12) ? json(nullptr) : json(st.column_int(12));
        j["cooldown"] = st.column_int(13);
        out.push_back(std::move(j));
      });
}

Status latest_verdict(const Database& db, const std::string& sample, std::optional<json>& out) {
  Statement st;
  if (auto s = Statement::prepare(
          db,
          "SELECT v.verdict_json, v.cooldown FROM verdicts v JOIN samples sm ON sm.id = v.sample_id"
          " WHERE sm.name = ?1 ORDER BY v.t DESC, v.sweep_index DESC LIMIT 1",
          st);
      !s) {
    return s;
  }
  st.bind(1, sample);
  out.reset();
  const int rc = st.step();
  if (rc == SQLITE_ROW) {
    json j = json::parse(st.column_text(0), nullptr, false);
    // A verdict stored before cooldowns were counted has the column's.
    if (j.is_object() && !j.contains("cooldown")) j["cooldown"] = st.column_int(1);
    if (j.is_object()) out = std::move(j);
  } else if (rc != SQLITE_DONE) {
    return db.error("reading the verdict");
  }
  return Status::success();
}

Status highest_seq(const Database& db, protocol::SourceKind kind, std::int64_t source_id,
                   std::optional<std::int64_t>& out) {
  static const char* const by_kind[3] = {"SELECT MAX(seq) FROM lockin_readings WHERE source_id = ?1",
                                          "SELECT MAX(seq) FROM thermometer_readings WHERE source_id = ?1",
                                          "SELECT MAX(seq) FROM field_readings WHERE source_id = ?1"};
  const char* sql = by_kind[static_cast<int>(kind)];
  Statement st;
  if (auto s = Statement::prepare(db, sql, st); !s) return s;
  st.bind(1, source_id);
  if (st.step() != SQLITE_ROW) return db.error("reading progress");
  out.reset();
  if (!st.column_is_null(0)) out = st.column_int(0);
  return Status::success();
}

Status gap_counts(const Database& db, std::map<std::string, std::uint64_t>& out) {
  Statement st;
  if (auto s = Statement::prepare(db,
                                  "SELECT s.name, COUNT(g.id) FROM sources s LEFT JOIN gaps g ON g.source_id = s.id"
                                  " GROUP BY s.id",
                                  st);
      !s) {
    return s;
  }
  int rc = 0;
  while ((rc = st.step()) == SQLITE_ROW) out[st.column_text(0)] = static_cast<std::uint64_t>(st.column_int(1));
  if (rc != SQLITE_DONE) return db.error("counting gaps");
  return Status::success();
}

}  // namespace lphi::store
