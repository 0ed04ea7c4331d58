#include "daemon/live/live_analysis.hpp"

#include <sys/statvfs.h>

#include <algorithm>
#include <cmath>
#include <condition_variable>
#include <deque>
#include <future>
#include <limits>
#include <map>
#include <mutex>
#include <optional>
#include <spdlog/spdlog.h>
#include <thread>

#include "daemon/alerts/alert_engine.hpp"
#include "daemon/store/writer.hpp"
#include "daemon/alerts/event_publisher.hpp"
#include "schema/result_json.hpp"
#include "schema/protocol/codec.hpp"

namespace lphi::live {

namespace {
constexpr std::string_view writer_stopping = "the store writer is stopping";
}  // namespace

using nlohmann::json;
using protocol::Reason;

namespace {

json error_reply(Reason reason, std::string detail) {
  return protocol::error_message({std::nullopt, reason, std::move(detail)});
}

json null_or(const store::Statement& st, int column) {
  return st.column_is_null(column) ? json(nullptr) : json(st.column_double(column));
}

template <class T>
void bind_finite(store::Statement& st, int index, const std::optional<T>& v) {
  if (v && std::isfinite(*v)) {
    st.bind(index, static_cast<double>(*v));
  } else {
    st.bind_null(index);
  }
}

void bind_finite(store::Statement& st, int index, double v) {
  bind_finite(st, index, std::optional<double>(v));
}

std::int64_t to_i64(std::size_t n) { return static_cast<std::int64_t>(n); }

std::vector<std::string> string_array(const std::string& text) {
  std::vector<std::string> out;
  auto j = json::parse(text, nullptr, false);
  if (!j.is_array()) return out;
  for (const auto& e : j) {
    if (e.is_string()) out.push_back(e.get<std::string>());
  }
  return out;
}

// An optional "sample" key: absent, or the name of a configured sample.
std::optional<json> check_sample_key(const json& request, const config::Config& config,
                                     std::optional<std::string>& sample, bool required) {
  auto it = request.find("sample");
  if (it == request.end() || it->is_null()) {
    if (required) return error_reply(Reason::missing_field, "the request needs \"sample\": a sample's name");
    return std::nullopt;
  }
  if (!it->is_string()) return error_reply(Reason::wrong_type, "\"sample\" must be a string");
  const std::string name = it->get<std::string>();
  for (const auto& s : config.samples) {
    if (s.name == name) {
      sample = name;
      return std::nullopt;
    }
  }
  return error_reply(Reason::unknown_source, "no sample is named \"" + name + "\"");
}

}  // namespace

SampleSettings sample_settings(const config::SampleConfig& c) {
  SampleSettings s;
  s.name = c.name;
  s.model = mc::model_from_name(c.model).value_or(mc::Model::hln2d);
  s.geometry.squares = c.squares;
  s.geometry.width_m = c.width_m;
  s.geometry.thickness_m = c.thickness_m;
  s.geometry.mean_free_path_m = c.mean_free_path_m.value_or(0.0);
  s.excitation_a = c.excitation_a;
  s.gain = c.gain.value_or(1.0);
  s.diffusion_m2s = c.diffusion_m2s;
  s.alpha_fixed = c.alpha_fixed;
  s.probe_length_m = c.probe_length_m;
  s.fit_window_t = c.fit_window_t;
  s.fit_background = c.fit_background;
  s.combine_up_down = c.combine_up_down;
  s.aligner.max_age_temperature_s = c.max_age_temperature_s;
  s.aligner.max_age_field_s = c.max_age_field_s;
  s.aligner.max_hold_s = c.max_hold_s;
  s.segmenter.min_span_t = c.sweep_min_span_t;
  s.segmenter.reversal_tolerance_t = c.reversal_tolerance_t;
  s.segmenter.field_step_t = c.field_step_t;
  s.segmenter.plateau.relative_spread = c.plateau_relative_spread;
  s.segmenter.plateau.min_duration_s = c.plateau_min_duration_s;
  s.segmenter.settling_time_constants = c.settling_time_constants;
  s.segmenter.settling_unknown_tau_s = c.settling_unknown_tau_s;
  s.heating.max_ratio = c.excitation_ratio_max;
  s.lockin.max_quadrature_ratio = c.quadrature_ratio_max;
  s.new_cooldown_above_k = c.new_cooldown_above_k;
  return s;
}

// ---- one sample's thread ----------------------------------------------------

struct LiveAnalysis::Worker {
  enum Stream { lockin = 0, thermometer = 1, field = 2 };
  struct Row {
    std::int64_t seq = 0;
    double t = 0.0;
    align::LockinReading lockin;
    double value = 0.0;  // temperature_k or field_t
  };
  struct Progress {
    std::int64_t analysed_seq[3] = {-1, -1, -1};
    bool busy = true;
    int waiting_for = -1;
    std::size_t sweeps = 0, fits = 0, fits_reused = 0;
    std::string error;
  };

  config::SampleConfig config;
  SampleSettings settings;
  std::int64_t sample_id = 0;
  std::int64_t source_id[3] = {0, 0, 0};
  std::string source_name[3];
  LiveOptions options;
  alerts::AlertEngine* engine = nullptr;
  store::StoreWriter* writer = nullptr;
  alerts::EventPublisher* events = nullptr;
  const std::atomic<bool>* stopping = nullptr;

  store::Database read_db, write_db;
  store::Statement select[3];
  std::deque<Row> buffer[3];
  bool caught_up[3] = {false, false, false};
  std::int64_t cursor[3] = {-1, -1, -1};
  double known_t[3] = {-std::numeric_limits<double>::infinity(), -std::numeric_limits<double>::infinity(),
                       -std::numeric_limits<double>::infinity()};  // t of the last reading pushed
  double lag_allowance_s = 0.0;
  int waiting_for = -1;  // the stream the others wait for, -1 none
  std::int64_t replayed_through = -1;  // sweeps up to this index were stored before this start
  std::unique_ptr<SamplePipeline> pipeline;
  std::map<std::int64_t, std::int64_t> sweep_ids;  // sweep index -> sweeps.id

  std::mutex mutex;  // guards progress, wake
  std::condition_variable wake;
  Progress progress;
  std::thread thread;

  Status open(const std::string& db_path);
  Status load_stored(std::map<std::int64_t, FitRecord>& stored);
  void run();
  bool refill(int stream);
  bool push_merged();
  Status write(const PipelineOutput& out);
  Status write_records(store::Database& db, const PipelineOutput& out);
  void publish(const PipelineOutput& out);
  json sweep_json(const SweepRecord& s, std::int64_t sweep_id) const;
  json fit_json(const FitRecord& f, std::int64_t sweep_id, double t_start) const;
  void set_progress(bool busy);
};

Status LiveAnalysis::Worker::open(const std::string& path) {
  if (auto s = store::Database::open(path, store::OpenMode::read_only, read_db); !s) return s;
  if (auto s = store::Database::open(path, store::OpenMode::writer, write_db); !s) return s;
  static const char* queries[3] = {
      "SELECT seq, t, x_v, y_v, range_v, time_constant_s, overload FROM lockin_readings"
      " WHERE source_id = ?1 AND seq > ?2 ORDER BY seq LIMIT ?3",
      "SELECT seq, t, temperature_k FROM thermometer_readings"
      " WHERE source_id = ?1 AND seq > ?2 ORDER BY seq LIMIT ?3",
      "SELECT seq, t, field_t FROM field_readings WHERE source_id = ?1 AND seq > ?2 ORDER BY seq LIMIT ?3"};
  for (int k = 0; k < 3; ++k) {
    if (auto s = store::Statement::prepare(read_db, queries[k], select[k]); !s) return s;
  }
  return Status::success();
}

Status LiveAnalysis::Worker::load_stored(std::map<std::int64_t, FitRecord>& stored) {
  store::Statement st;
  if (auto s = store::Statement::prepare(write_db, "SELECT sweep_index, id FROM sweeps WHERE sample_id = ?1", st); !s) {
    return s;
  }
  st.bind(1, sample_id);
  int rc = 0;
  while ((rc = st.step()) == SQLITE_ROW) {
    const std::int64_t index = st.column_int(0);
    sweep_ids[index] = st.column_int(1);
    replayed_through = std::max(replayed_through, index);
  }
  if (rc != SQLITE_DONE) return write_db.error("reading the stored sweeps of " + config.name);
  store::Statement fits;
  if (auto s = store::Statement::prepare(
          write_db,
          "SELECT sw.sweep_index, f.ok, f.error, f.model, f.lphi_m, f.lphi_err_m, f.chi2_red, f.converged,"
          " f.flags_json, f.sigma0_s, f.sigma0_err_s, f.used_in_dephasing, f.quality_json, f.result_json, f.t"
          " FROM fits f JOIN sweeps sw ON sw.id = f.sweep_id WHERE f.sample_id = ?1",
          fits);
      !s) {
    return s;
  }
  fits.bind(1, sample_id);
  while ((rc = fits.step()) == SQLITE_ROW) {
    FitRecord f;
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
    stored[f.sweep_index] = std::move(f);
  }
  if (rc != SQLITE_DONE) return write_db.error("reading the stored fits of " + config.name);
  return Status::success();
}

// Reads the next chunk of one stream after its cursor. False when nothing new.
bool LiveAnalysis::Worker::refill(int k) {
  auto& st = select[k];
  st.reset();
  const std::int64_t after = buffer[k].empty() ? cursor[k] : buffer[k].back().seq;
  st.bind(1, source_id[k]);
  st.bind(2, after);
  st.bind(3, to_i64(options.chunk_readings));
  std::size_t n = 0;
  int rc = 0;
  while ((rc = st.step()) == SQLITE_ROW) {
    Row r;
    r.seq = st.column_int(0);
    r.t = st.column_double(1);
    if (k == lockin) {
      r.lockin.t_s = r.t;
      r.lockin.x_v = st.column_double(2);
      r.lockin.y_v = st.column_double(3);
      r.lockin.range_v = st.column_is_null(4) ? 0.0 : st.column_double(4);
      r.lockin.time_constant_s = st.column_is_null(5) ? 0.0 : st.column_double(5);
      r.lockin.overload = !st.column_is_null(6) && st.column_int(6) != 0;
    } else {
      r.value = st.column_double(2);
    }
    buffer[k].push_back(r);
    ++n;
  }
  st.reset();
  if (rc != SQLITE_DONE) {
    spdlog::warn("sample {}: reading {} failed: {}", config.name, source_name[k],
                 sqlite3_errmsg(read_db.handle()));
    caught_up[k] = true;
    return false;
  }
  caught_up[k] = n < options.chunk_readings;
  return n > 0;
}

// Pushes readings in event time until the pipeline is full or every stream
// has run dry. Returns whether anything was pushed.
bool LiveAnalysis::Worker::push_merged() {
  bool pushed = false;
  for (int k = 0; k < 3; ++k) {
    if (buffer[k].empty()) refill(k);
  }
  while (!pipeline->full() && !stopping->load()) {
    int next = -1;
    for (int k = 0; k < 3; ++k) {
      if (buffer[k].empty()) continue;
      if (next < 0 || buffer[k].front().t < buffer[next].front().t) next = k;
    }
    if (next < 0) break;
    // A stream that ran dry but may have more (its last chunk was full) is
    // read before anything later than its cursor is pushed.
    bool refilled = false;
    for (int k = 0; k < 3; ++k) {
      if (buffer[k].empty() && !caught_up[k]) refilled = refill(k) || refilled;
    }
    if (refilled) continue;
    // A stream that has nothing more for now may still send readings older
    // than this one; pushing far ahead of it would make the Aligner decide
    // without them, and the result would depend on arrival. So readings go
    // in only while every other stream is within `lag_allowance_s` of them
    // (alignment.hpp: its output is arrival-independent within that lag);
    // a stream that stays behind (silent) stops the sample's analysis, whose
    // readings could not be aligned anyway.
    const double t_next = buffer[next].front().t;
    int behind = -1;
    for (int k = 0; k < 3; ++k) {
      if (k != next && buffer[k].empty() && !(known_t[k] >= t_next - lag_allowance_s)) behind = k;
    }
    waiting_for = behind;
    if (behind >= 0) break;
    const Row r = buffer[next].front();
    buffer[next].pop_front();
    cursor[next] = r.seq;
    known_t[next] = r.t;
    pushed = true;
    if (next == lockin) {
      pipeline->push(r.lockin);
    } else if (next == thermometer) {
      pipeline->push(align::TemperatureReading{r.t, r.value});
    } else {
      pipeline->push(align::FieldReading{r.t, r.value});
    }
    if (buffer[next].empty() && !caught_up[next]) refill(next);
  }
  return pushed;
}

json LiveAnalysis::Worker::sweep_json(const SweepRecord& s, std::int64_t sweep_id) const {
  return {{"sweep_id", sweep_id},
          {"sample", config.name},
          {"index", s.index},
          {"cooldown", s.cooldown},
          {"direction", std::string(segment::direction_name(s.direction))},
          {"t_start", s.t_start_s},
          {"t_end", s.t_end_s},
          {"field_min_t", s.field_min_t},
          {"field_max_t", s.field_max_t},
          {"n_points", s.n_points},
          {"temperature_k", s.temperature.mean_k},
          {"temperature_spread_k", s.temperature.std_k},
          {"temperature_unstable", s.temperature_unstable},
          {"truncated", s.truncated},
          {"n_overload", s.n_overload},
          {"max_quadrature_ratio", schema::optional_json(s.max_quadrature_ratio)},
          {"excitation_ratio", schema::optional_json(s.excitation_ratio)},
          {"fitted", false}};
}

json LiveAnalysis::Worker::fit_json(const FitRecord& f, std::int64_t sweep_id, double t_start) const {
  json j = f.result.is_object() ? f.result : json::object();
  j["sweep_id"] = sweep_id;
  j["sweep_index"] = f.sweep_index;
  j["cooldown"] = f.cooldown;
  j["sample"] = config.name;
  j["temperature_k"] = f.temperature_k;
  j["temperature_spread_k"] = f.temperature_spread_k;
  j["t_start"] = t_start;
  j["t_end"] = f.t_s;
  j["ok"] = f.ok;
  j["error"] = f.error;
  j["used_in_dephasing"] = f.used_in_dephasing;
  j["quality"] = f.quality;
  j["combined_with"] = f.combined_with ? json(*f.combined_with) : json(nullptr);
  return j;
}

// The records of one step, on `db` inside a transaction the caller owns.
Status LiveAnalysis::Worker::write_records(store::Database& db, const PipelineOutput& out) {
  auto fail = [&](const std::string& doing) {
    auto s = db.error(doing);
    return s;
  };
  store::Statement st;
  if (!out.sweeps.empty()) {
    if (!store::Statement::prepare(
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
      return fail("preparing the sweep insert");
    }
    store::Statement id;
    if (!store::Statement::prepare(db, "SELECT id FROM sweeps WHERE sample_id = ?1 AND sweep_index = ?2", id)) {
      return fail("preparing the sweep lookup");
    }
    for (const auto& s : out.sweeps) {
      st.reset();
      st.bind(1, sample_id);
      st.bind(2, s.index);
      st.bind(3, segment::direction_name(s.direction));
      st.bind(4, s.t_start_s);
      st.bind(5, s.t_end_s);
      st.bind(6, s.field_min_t);
      st.bind(7, s.field_max_t);
      st.bind(8, to_i64(s.n_points));
      st.bind(9, s.temperature.mean_k);
      st.bind(10, s.temperature.std_k);
      st.bind(11, s.temperature.min_k);
      st.bind(12, s.temperature.max_k);
      st.bind(13, s.temperature_run);
      st.bind(14, std::int64_t{s.temperature_unstable});
      st.bind(15, std::int64_t{s.truncated});
      st.bind(16, to_i64(s.n_overload));
      // |Y/X| is infinite for X = 0: stored as the largest double.
      st.bind(17, std::isfinite(s.max_quadrature_ratio) ? s.max_quadrature_ratio
                                                         : std::numeric_limits<double>::max());
      st.bind(18, s.sample_voltage_v);
      bind_finite(st, 19, s.excitation_ratio);
      st.bind(20, s.cooldown);
      if (st.step() != SQLITE_DONE) return fail("storing sweep " + std::to_string(s.index));
      id.reset();
      id.bind(1, sample_id);
      id.bind(2, s.index);
      if (id.step() != SQLITE_ROW) return fail("finding sweep " + std::to_string(s.index));
      sweep_ids[s.index] = id.column_int(0);
    }
  }
  bool new_fits = false;
  for (const auto& f : out.fits) new_fits = new_fits || !f.from_store;
  if (new_fits) {
    if (!store::Statement::prepare(
             db,
             "INSERT OR REPLACE INTO fits (sweep_id, sample_id, combined_with, ok, error, model, lphi_m, lphi_err_m,"
             " chi2_red, converged, flags_json, temperature_k, temperature_spread_k, sigma0_s, sigma0_err_s,"
             " used_in_dephasing, quality_json, result_json, t, cooldown)"
             " VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11, ?12, ?13, ?14, ?15, ?16, ?17, ?18, ?19, ?20)",
             st)) {
      return fail("preparing the fit insert");
    }
    for (const auto& f : out.fits) {
      if (f.from_store) continue;
      st.reset();
      st.bind(1, sweep_ids.at(f.sweep_index));
      st.bind(2, sample_id);
      if (f.combined_with) {
        st.bind(3, sweep_ids.at(*f.combined_with));
      } else {
        st.bind_null(3);
      }
      st.bind(4, std::int64_t{f.ok});
      st.bind(5, f.error);
      st.bind(6, f.model);
      bind_finite(st, 7, f.lphi_m);
      bind_finite(st, 8, f.lphi_err_m);
      bind_finite(st, 9, f.chi2_red);
      st.bind(10, std::int64_t{f.converged});
      st.bind(11, json(f.flags).dump());
      st.bind(12, f.temperature_k);
      st.bind(13, f.temperature_spread_k);
      bind_finite(st, 14, f.sigma0_s);
      bind_finite(st, 15, f.sigma0_err_s);
      st.bind(16, std::int64_t{f.used_in_dephasing});
      st.bind(17, json(f.quality).dump());
      st.bind(18, f.result.dump());
      st.bind(19, f.t_s);
      st.bind(20, f.cooldown);
      if (st.step() != SQLITE_DONE) return fail("storing the fit of sweep " + std::to_string(f.sweep_index));
    }
  }
  if (!out.zero_field.empty()) {
    if (!store::Statement::prepare(
             db,
             "INSERT OR REPLACE INTO zero_field_points (sample_id, temperature_run, temperature_k, sigma_s,"
             " sigma_err_s, n_sweeps, t, cooldown) VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8)",
             st)) {
      return fail("preparing the zero-field insert");
    }
    for (const auto& z : out.zero_field) {
      st.reset();
      st.bind(1, sample_id);
      st.bind(2, z.temperature_run);
      st.bind(3, z.temperature_k);
      st.bind(4, z.sigma_s);
      st.bind(5, z.sigma_err_s);
      st.bind(6, to_i64(z.n_sweeps));
      st.bind(7, z.t_s);
      st.bind(8, z.cooldown);
      if (st.step() != SQLITE_DONE) return fail("storing sigma(0) of a plateau");
    }
  }
  if (!out.verdicts.empty()) {
    if (!store::Statement::prepare(
             db,
             "INSERT OR REPLACE INTO verdicts (sample_id, sweep_index, t, state, electrons_cooling, likely_cause,"
             " exponent_p, lphi_sat_m, t_sat_k, n_points, verdict_json, cooldown)"
             " VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11, ?12)",
             st)) {
      return fail("preparing the verdict insert");
    }
    for (const auto& v : out.verdicts) {
      st.reset();
      st.bind(1, sample_id);
      st.bind(2, v.sweep_index);
      st.bind(3, v.t_s);
      st.bind(4, v.state);
      if (v.electrons_cooling) {
        st.bind(5, std::int64_t{*v.electrons_cooling});
      } else {
        st.bind_null(5);
      }
      if (v.likely_cause) {
        st.bind(6, *v.likely_cause);
      } else {
        st.bind_null(6);
      }
      bind_finite(st, 7, v.exponent_p);
      bind_finite(st, 8, v.lphi_sat_m);
      bind_finite(st, 9, v.t_sat_k);
      st.bind(10, to_i64(v.n_points));
      st.bind(11, v.json.dump());
      st.bind(12, v.cooldown);
      if (st.step() != SQLITE_DONE) return fail("storing the verdict");
    }
  }
  return Status::success();
}

Status LiveAnalysis::Worker::write(const PipelineOutput& out) {
  if (out.sweeps.empty() && out.fits.empty() && out.verdicts.empty()) return Status::success();
  if (writer == nullptr) {  // no store writer (a test of this class alone): our own transaction
    if (auto s = write_db.exec("BEGIN IMMEDIATE"); !s) return s;
    if (auto s = write_records(write_db, out); !s) {
      (void)write_db.exec("ROLLBACK");
      return s;
    }
    if (auto s = write_db.exec("COMMIT"); !s) {
      (void)write_db.exec("ROLLBACK");
      return s;
    }
    return Status::success();
  }
  // Through the store's writer thread, in order with the readings, and wait
  // until it is durable: the records must be stored before they are
  // published. The writer takes a task whenever it runs (tasks hold no
  // readings); it refuses only when it is stopping.
  std::promise<Status> done;
  auto durable = done.get_future();
  store::WriteJob job;
  job.task = [this, &out](store::Database& db) { return write_records(db, out); };
  job.on_durable = [&done](const store::WriteResult& r) { done.set_value(r.status); };
  if (!writer->try_submit(job)) return Status::unavailable(std::string(writer_stopping));
  return durable.get();
}

void LiveAnalysis::Worker::publish(const PipelineOutput& out) {
  std::map<std::int64_t, const SweepRecord*> by_index;
  for (const auto& s : out.sweeps) by_index[s.index] = &s;
  for (const auto& s : out.sweeps) {
    if (s.index <= replayed_through) continue;
    const std::int64_t id = sweep_ids.count(s.index) != 0 ? sweep_ids.at(s.index) : 0;
    if (events != nullptr) events->publish("sweep", sweep_json(s, id));
    if (engine != nullptr) {
      alerts::SweepFact fact;
      fact.sample = config.name;
      fact.sweep_id = id;
      fact.sweep_index = s.index;
      fact.t = s.t_end_s;
      fact.temperature_unstable = s.temperature_unstable;
      fact.temperature_k = s.temperature.mean_k;
      fact.temperature_spread_k = s.temperature.std_k;
      fact.n_points = s.n_points;
      fact.n_overload = s.n_overload;
      fact.max_quadrature_ratio = s.max_quadrature_ratio;
      fact.excitation_ratio = s.excitation_ratio.value_or(0.0);
      engine->on_sweep(fact);
    }
  }
  for (const auto& f : out.fits) {
    if (f.from_store) continue;
    const std::int64_t id = sweep_ids.count(f.sweep_index) != 0 ? sweep_ids.at(f.sweep_index) : 0;
    const std::int64_t first = f.combined_with.value_or(f.sweep_index);
    double t_start = f.t_s;
    if (auto it = by_index.find(first); it != by_index.end()) t_start = it->second->t_start_s;
    if (events != nullptr) events->publish("fit", fit_json(f, id, t_start));
    if (engine != nullptr) {
      alerts::FitFact fact;
      fact.sample = config.name;
      fact.sweep_id = id;
      fact.sweep_index = f.sweep_index;
      fact.t = f.t_s;
      fact.ok = f.ok;
      fact.error = f.error;
      fact.converged = f.converged;
      fact.chi2_red = f.chi2_red;
      fact.lphi_m = f.lphi_m;
      fact.lphi_err_m = f.lphi_err_m;
      fact.temperature_k = f.temperature_k;
      fact.flags = f.flags;
      engine->on_fit(fact);
    }
  }
  std::map<std::int64_t, bool> fit_from_store;
  for (const auto& f : out.fits) fit_from_store[f.sweep_index] = f.from_store;
  for (const auto& v : out.verdicts) {
    // The verdict after a stored fit was stored (and told) before the restart.
    if (fit_from_store[v.sweep_index]) continue;
    json body = v.json;
    body["sample"] = config.name;
    if (events != nullptr) events->publish("verdict", body);
    if (engine != nullptr) {
      alerts::VerdictFact fact;
      fact.sample = config.name;
      fact.t = v.t_s;
      fact.sweep_index = v.sweep_index;
      fact.cooldown = v.cooldown;
      fact.state = v.state;
      fact.electrons_cooling = v.electrons_cooling;
      fact.likely_cause = v.likely_cause;
      fact.t_sat_k = v.t_sat_k;
      fact.lphi_sat_m = v.lphi_sat_m;
      engine->on_verdict(fact);
    }
  }
}

void LiveAnalysis::Worker::set_progress(bool busy) {
  std::lock_guard lock(mutex);
  for (int k = 0; k < 3; ++k) progress.analysed_seq[k] = cursor[k];
  progress.busy = busy;
  progress.waiting_for = waiting_for;
  progress.sweeps = pipeline->sweeps_seen();
  progress.fits = pipeline->fits_done();
  progress.fits_reused = pipeline->fits_reused();
}

void LiveAnalysis::Worker::run() {
  PipelineOutput out;
  bool write_failed = false;
  while (!stopping->load()) {
    const bool pushed = push_merged();
    const bool work = pipeline->has_work();
    if (work) {
      out.clear();
      pipeline->process(out, 1);
      if (auto s = write(out); !s) {
        if (s.code() == StatusCode::unavailable) {
          // lphid is shutting down (the writer stops before the analysis):
          // these records are not stored, and the next start refits them.
          spdlog::info("sample {}: {}; the last records are left for the next start", config.name, s.message());
          break;
        }
        // Going on would lose these records for good (the next start would
        // find the sweep without its fit): stop this sample's analysis, say so.
        spdlog::error("sample {}: {}; its analysis stops until lphid restarts", config.name, s.message());
        std::lock_guard lock(mutex);
        progress.error = s.message();
        write_failed = true;
        break;
      }
      publish(out);
    }
    set_progress(pipeline->has_work());
    if (!pushed && !work) {
      std::unique_lock lock(mutex);
      wake.wait_for(lock, options.poll_interval, [&] { return stopping->load(); });
      for (int k = 0; k < 3; ++k) caught_up[k] = false;
    }
  }
  if (write_failed) set_progress(true);
}

// ---- LiveAnalysis ------------------------------------------------------------

Status LiveAnalysis::create(const config::Config& config, const LiveOptions& options,
                                   alerts::AlertEngine* engine, alerts::EventPublisher* events,
                                   std::unique_ptr<LiveAnalysis>& out) {
  std::unique_ptr<LiveAnalysis> a(new LiveAnalysis());
  a->config_ = config;
  a->options_ = options;
  a->engine_ = engine;
  a->events_ = events;
  const std::string path = store::database_path(options.data_dir);
  if (auto s = store::Database::open(path, store::OpenMode::read_only, a->control_db_); !s) return s;
  for (const auto& sample : config.samples) {
    auto w = std::make_unique<Worker>();
    w->config = sample;
    w->settings = sample_settings(sample);
    w->options = options;
    w->engine = engine;
    w->writer = options.writer;
    w->events = events;
    w->stopping = &a->stopping_;
    w->lag_allowance_s = w->settings.aligner.max_hold_s -
                         std::max(w->settings.aligner.max_age_temperature_s, w->settings.aligner.max_age_field_s);
    if (auto e = validate(w->settings); !e.empty()) {
      return Status::invalid_input("sample " + sample.name + ": " + e);
    }
    if (auto s = w->open(path); !s) return s;
    store::Statement st;
    if (auto s = store::Statement::prepare(w->write_db, "SELECT id FROM samples WHERE name = ?1", st); !s) return s;
    st.bind(1, sample.name);
    if (st.step() != SQLITE_ROW) return Status::internal("sample " + sample.name + " is not registered");
    w->sample_id = st.column_int(0);
    const std::string names[3] = {sample.lockin, sample.thermometer, sample.field};
    for (int k = 0; k < 3; ++k) {
      store::Statement src;
      if (auto s = store::Statement::prepare(w->write_db, "SELECT id FROM sources WHERE name = ?1", src); !s) return s;
      src.bind(1, names[k]);
      if (src.step() != SQLITE_ROW) {
        return Status::internal("sample " + sample.name + ": source " + names[k] + " is not registered");
      }
      w->source_id[k] = src.column_int(0);
      w->source_name[k] = names[k];
    }
    std::map<std::int64_t, FitRecord> stored;
    if (auto s = w->load_stored(stored); !s) return s;
    if (!stored.empty() || w->replayed_through >= 0) {
      spdlog::info("sample {}: {} sweeps and {} fits stored; re-reading the readings, reusing the fits",
                   sample.name, w->sweep_ids.size(), stored.size());
    }
    w->pipeline = std::make_unique<SamplePipeline>(w->settings, std::move(stored));
    a->workers_.push_back(std::move(w));
  }
  out = std::move(a);
  return Status::success();
}

LiveAnalysis::~LiveAnalysis() { stop(); }

void LiveAnalysis::start() {
  for (auto& w : workers_) {
    if (!w->thread.joinable()) w->thread = std::thread([p = w.get()] { p->run(); });
  }
}

void LiveAnalysis::stop() {
  stopping_.store(true);
  for (auto& w : workers_) {
    {
      std::lock_guard lock(w->mutex);
    }
    w->wake.notify_all();
  }
  for (auto& w : workers_) {
    if (w->thread.joinable()) w->thread.join();
  }
}

std::vector<std::string> LiveAnalysis::request_types() {
  return {"samples", "sweeps", "fits", "verdict", "progress"};
}

json LiveAnalysis::handle_request(const json& request) {
  const std::string type = request.value("type", "");
  if (type == "samples") return samples_reply();
  if (type == "sweeps") return sweeps_reply(request);
  if (type == "fits") return fits_reply(request);
  if (type == "verdict") return verdict_reply(request);
  if (type == "progress") return progress_reply(request);
  return error_reply(Reason::unknown_type, "the analysis does not answer \"" + type + "\"");
}

json LiveAnalysis::samples_reply() const {
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

json LiveAnalysis::sweeps_reply(const json& request) {
  std::optional<std::string> sample;
  if (auto bad = check_sample_key(request, config_, sample, false)) return *bad;
  store::Statement st;
  if (auto s = store::Statement::prepare(
          control_db_,
          "SELECT s.id, sm.name, s.sweep_index, s.direction, s.t_start, s.t_end, s.field_min_t, s.field_max_t,"
          " s.n_points, s.temperature_k, s.temperature_spread_k, s.temperature_unstable, s.truncated,"
          " s.n_overload, s.max_quadrature_ratio, s.excitation_ratio,"
          " EXISTS (SELECT 1 FROM fits f WHERE f.sweep_id = s.id OR f.combined_with = s.id), s.cooldown"
          " FROM sweeps s JOIN samples sm ON sm.id = s.sample_id"
          " WHERE ?1 IS NULL OR sm.name = ?1 ORDER BY sm.name, s.sweep_index",
          st);
      !s) {
    return error_reply(Reason::storage_error, s.message());
  }
  st.bind_optional(1, sample);
  json sweeps = json::array();
  int rc = 0;
  while ((rc = st.step()) == SQLITE_ROW) {
    sweeps.push_back({{"sweep_id", st.column_int(0)},
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
                      {"cooldown", st.column_int(17)}});
  }
  if (rc != SQLITE_DONE) return error_reply(Reason::storage_error, control_db_.error("listing sweeps").message());
  return {{"type", "sweeps"}, {"sweeps", std::move(sweeps)}};
}

json LiveAnalysis::fits_reply(const json& request) {
  std::optional<std::string> sample;
  if (auto bad = check_sample_key(request, config_, sample, false)) return *bad;
  store::Statement st;
  if (auto s = store::Statement::prepare(
          control_db_,
          "SELECT f.sweep_id, sm.name, s.sweep_index, f.result_json, f.temperature_k, f.temperature_spread_k,"
          " COALESCE(c.t_start, s.t_start), s.t_end, f.ok, f.error, f.used_in_dephasing, f.quality_json,"
          " c.sweep_index, f.cooldown"
          " FROM fits f JOIN sweeps s ON s.id = f.sweep_id JOIN samples sm ON sm.id = f.sample_id"
          " LEFT JOIN sweeps c ON c.id = f.combined_with"
          " WHERE ?1 IS NULL OR sm.name = ?1 ORDER BY sm.name, s.sweep_index",
          st);
      !s) {
    return error_reply(Reason::storage_error, s.message());
  }
  st.bind_optional(1, sample);
  json fits = json::array();
  int rc = 0;
  while ((rc = st.step()) == SQLITE_ROW) {
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
    fits.push_back(std::move(j));
  }
  if (rc != SQLITE_DONE) return error_reply(Reason::storage_error, control_db_.error("listing fits").message());
  return {{"type", "fits"}, {"fits", std::move(fits)}};
}

json LiveAnalysis::verdict_reply(const json& request) {
  std::optional<std::string> sample;
  if (auto bad = check_sample_key(request, config_, sample, false)) return *bad;
  store::Statement st;
  if (auto s = store::Statement::prepare(
          control_db_,
          "SELECT v.verdict_json, v.cooldown FROM verdicts v JOIN samples sm ON sm.id = v.sample_id"
          " WHERE sm.name = ?1 ORDER BY v.t DESC, v.sweep_index DESC LIMIT 1",
          st);
      !s) {
    return error_reply(Reason::storage_error, s.message());
  }
  json verdicts = json::array();
  for (const auto& s : config_.samples) {
    if (sample && *sample != s.name) continue;
    st.reset();
    st.bind(1, s.name);
    json j;
    const int rc = st.step();
    if (rc == SQLITE_ROW) {
      j = json::parse(st.column_text(0), nullptr, false);
      // A verdict stored before cooldowns were counted has the column's.
      if (j.is_object() && !j.contains("cooldown")) j["cooldown"] = st.column_int(1);
    } else if (rc != SQLITE_DONE) {
      return error_reply(Reason::storage_error, control_db_.error("reading the verdict").message());
    }
    if (!j.is_object()) j = no_data_verdict_json();
    j["sample"] = s.name;
    verdicts.push_back(std::move(j));
  }
  return {{"type", "verdict"}, {"verdicts", std::move(verdicts)}};
}

json LiveAnalysis::progress_reply(const json& request) {
  std::optional<std::string> sample;
  if (auto bad = check_sample_key(request, config_, sample, true)) return *bad;
  Worker* w = nullptr;
  for (auto& candidate : workers_) {
    if (candidate->config.name == *sample) w = candidate.get();
  }
  if (w == nullptr) return error_reply(Reason::unknown_source, "no sample is named \"" + *sample + "\"");
  Worker::Progress p;
  {
    std::lock_guard lock(w->mutex);
    p = w->progress;
  }
  static const char* tables[3] = {"lockin_readings", "thermometer_readings", "field_readings"};
  static const char* kinds[3] = {"lockin", "thermometer", "field"};
  json sources = json::array();
  bool idle = !p.busy && p.error.empty() && w->thread.joinable();
  for (int k = 0; k < 3; ++k) {
    store::Statement st;
    if (auto s = store::Statement::prepare(control_db_,
                                           std::string("SELECT MAX(seq) FROM ") + tables[k] + " WHERE source_id = ?1", st);
        !s) {
      return error_reply(Reason::storage_error, s.message());
    }
    st.bind(1, w->source_id[k]);
    if (st.step() != SQLITE_ROW) return error_reply(Reason::storage_error, control_db_.error("reading progress").message());
    json committed = nullptr;
    if (!st.column_is_null(0)) {
      const std::int64_t seq = st.column_int(0);
      committed = seq;
      if (seq > p.analysed_seq[k]) idle = false;
    }
    sources.push_back({{"name", w->source_name[k]},
                       {"kind", kinds[k]},
                       {"committed_seq", committed},
                       {"analysed_seq", p.analysed_seq[k] >= 0 ? json(p.analysed_seq[k]) : json(nullptr)}});
  }
  json reply = {{"type", "progress"},  {"sample", *sample},  {"sources", std::move(sources)},
                {"idle", idle},        {"sweeps", p.sweeps}, {"fits", p.fits},
                {"fits_reused", p.fits_reused}};
  // A stream the others wait for (silent, or behind by more than the
  // aligner tolerates): the analysis resumes when it catches up.
  reply["waiting_for"] = p.waiting_for >= 0 ? json(w->source_name[p.waiting_for]) : json(nullptr);
  if (!p.error.empty()) reply["error"] = p.error;
  return reply;
}

void LiveAnalysis::on_health(const json& status) {
  if (engine_ == nullptr) return;
  alerts::HealthFact fact;
  // Liveness is judged on the wall clock (alert_engine.hpp), never the analysis.
  fact.now_unix = std::chrono::duration<double>(std::chrono::system_clock::now().time_since_epoch()).count();
  std::map<std::string, std::uint64_t> gaps;
  store::Statement st;
  if (store::Statement::prepare(control_db_,
                                "SELECT s.name, COUNT(g.id) FROM sources s LEFT JOIN gaps g ON g.source_id = s.id"
                                " GROUP BY s.id",
                                st)) {
    while (st.step() == SQLITE_ROW) gaps[st.column_text(0)] = static_cast<std::uint64_t>(st.column_int(1));
  }
  if (auto it = status.find("sources"); it != status.end() && it->is_array()) {
    for (const auto& s : *it) {
      alerts::SourceHealth h;
      h.name = s.value("name", "");
      if (auto a = s.find("last_arrival_unix"); a != s.end() && a->is_number()) h.last_arrival_unix = a->get<double>();
      h.gaps = gaps[h.name];
      fact.sources.push_back(std::move(h));
    }
  }
  struct statvfs vfs {};
  if (::statvfs(options_.data_dir.c_str(), &vfs) == 0) {
    fact.disk_free_bytes = static_cast<double>(vfs.f_bavail) * static_cast<double>(vfs.f_frsize);
  }
  if (auto w = status.find("writer"); w != status.end() && w->is_object()) {
    fact.writer_lag_s = w->value("lag_s", 0.0);
  }
  engine_->on_health(fact);
}

}  // namespace lphi::live
