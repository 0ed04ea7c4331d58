#include "daemon/live/stream_merger.hpp"

#include <sqlite3.h>

#include <limits>
#include <spdlog/spdlog.h>

namespace lphi::live {

Status StreamMerger::open(const std::string& db_path, const std::int64_t (&source_id)[3],
                          const std::string (&source_name)[3], const std::string& sample_name,
                          std::size_t chunk_readings, double lag_allowance_s) {
  sample_name_ = sample_name;
  chunk_readings_ = chunk_readings;
  lag_allowance_s_ = lag_allowance_s;
  for (int k = 0; k < 3; ++k) {
    source_id_[k] = source_id[k];
    source_name_[k] = source_name[k];
    known_t_[k] = -std::numeric_limits<double>::infinity();
  }
  if (auto s = store::Database::open(db_path, store::OpenMode::read_only, db_); !s) return s;
  static const char* queries[3] = {
      "SELECT seq, t, x_v, y_v, range_v, time_constant_s, overload FROM lockin_readings"
      " WHERE source_id = ?1 AND seq > ?2 ORDER BY seq LIMIT ?3",
      "SELECT seq, t, temperature_k FROM thermometer_readings"
      " WHERE source_id = ?1 AND seq > ?2 ORDER BY seq LIMIT ?3",
      "SELECT seq, t, field_t FROM field_readings WHERE source_id = ?1 AND seq > ?2 ORDER BY seq LIMIT ?3"};
  for (int k = 0; k < 3; ++k) {
    if (auto s = store::Statement::prepare(db_, queries[k], select_[k]); !s) return s;
  }
  return Status::success();
}

void StreamMerger::rewind_caught_up() {
  for (bool& c : caught_up_) c = false;
}

// Reads the next chunk of one stream after its cursor. False when nothing new.
bool StreamMerger::refill(int k) {
  auto& st = select_[k];
  st.reset();
  const std::int64_t after = buffer_[k].empty() ? cursor_[k] : buffer_[k].back().seq;
  st.bind(1, source_id_[k]);
  st.bind(2, after);
  st.bind(3, static_cast<std::int64_t>(chunk_readings_));
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
    buffer_[k].push_back(r);
    ++n;
  }
  st.reset();
  if (rc != SQLITE_DONE) {
    spdlog::warn("sample {}: reading {} failed: {}", sample_name_, source_name_[k],
                 db_.error("reading").message());
    caught_up_[k] = true;
    return false;
  }
  caught_up_[k] = n < chunk_readings_;
  return n > 0;
}

// The stream whose buffered reading comes first in event time, -1 if none.
int StreamMerger::earliest() const {
  int next = -1;
  for (int k = 0; k < 3; ++k) {
    if (buffer_[k].empty()) continue;
    if (next < 0 || buffer_[k].front().t < buffer_[next].front().t) next = k;
  }
  return next;
}

// A stream that has nothing more for now may still send readings older than
// the next one; pushing far ahead of it would make the Aligner decide without
// them, and the result would depend on arrival. So readings go in only while
// every other stream is within `lag_allowance_s` of them (alignment.hpp: its
// output is arrival-independent within that lag); a stream that stays behind
// (silent) stops the sample's analysis, whose readings could not be aligned
// anyway. Returns that stream, or -1.
int StreamMerger::behind(int next) const {
  const double t_next = buffer_[next].front().t;
  int late = -1;
  for (int k = 0; k < 3; ++k) {
    if (k != next && buffer_[k].empty() && !(known_t_[k] >= t_next - lag_allowance_s_)) late = k;
  }
  return late;
}

void StreamMerger::push_front(int k, SamplePipeline& pipeline) {
  const Row r = buffer_[k].front();
  buffer_[k].pop_front();
  cursor_[k] = r.seq;
  known_t_[k] = r.t;
  if (k == lockin) {
    pipeline.push(r.lockin);
  } else if (k == thermometer) {
    pipeline.push(align::TemperatureReading{r.t, r.value});
  } else {
    pipeline.push(align::FieldReading{r.t, r.value});
  }
  if (buffer_[k].empty() && !caught_up_[k]) refill(k);
}

bool StreamMerger::push_merged(SamplePipeline& pipeline, const std::atomic<bool>& stopping) {
  bool pushed = false;
  for (int k = 0; k < 3; ++k) {
    if (buffer_[k].empty()) refill(k);
  }
  while (!pipeline.full() && !stopping.load()) {
    const int next = earliest();
    if (next < 0) break;
    // A stream that ran dry but may have more (its last chunk was full) is
    // read before anything later than its cursor is pushed.
    bool refilled = false;
    for (int k = 0; k < 3; ++k) {
      if (buffer_[k].empty() && !caught_up_[k]) refilled = refill(k) || refilled;
    }
    if (refilled) continue;
    waiting_for_ = behind(next);
    if (waiting_for_ >= 0) break;
    push_front(next, pipeline);
    pushed = true;
  }
  return pushed;
}

}  // namespace lphi::live
