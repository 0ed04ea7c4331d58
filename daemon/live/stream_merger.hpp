// StreamMerger: one sample's three streams (lock-in, thermometer, field)
// read from the database after a cursor and pushed into its SamplePipeline
// in event time.
//
// It reads committed readings by (source_id, seq) through its own read-only
// connection, a chunk at a time, and pushes the earliest buffered reading
// while every other stream is known up to within the aligner's lag allowance
// of it, so that the pipeline sees the same sequence whatever the arrival
// order (alignment.hpp). A stream that stays behind (silent) holds the
// others: waiting_for() names it.
//
// Bounded: at most chunk_readings readings per stream are buffered.
// Thread safety: one thread (the sample's worker).
#pragma once

#include <atomic>
#include <cstdint>
#include <deque>
#include <string>

#include "daemon/live/sample_pipeline.hpp"
#include "daemon/store/database.hpp"

namespace lphi::live {

class StreamMerger {
 public:
  enum Stream { lockin = 0, thermometer = 1, field = 2 };

  // Opens the read-only connection and prepares the three queries.
  Status open(const std::string& db_path, const std::int64_t (&source_id)[3], const std::string (&source_name)[3],
              const std::string& sample_name, std::size_t chunk_readings, double lag_allowance_s);

  // Pushes readings in event time until the pipeline is full, `stopping`
  // becomes true or every stream has run dry. Returns whether anything was pushed.
  bool push_merged(SamplePipeline& pipeline, const std::atomic<bool>& stopping);
  // After a pause: every stream may have more, read again.
  void rewind_caught_up();

  std::int64_t cursor(int stream) const { return cursor_[stream]; }
  int waiting_for() const { return waiting_for_; }  // -1: none

 private:
  struct Row {
    std::int64_t seq = 0;
    double t = 0.0;
    align::LockinReading lockin;
    double value = 0.0;  // temperature_k or field_t
  };
  bool refill(int stream);
  int earliest() const;
  int behind(int next) const;
  void push_front(int stream, SamplePipeline& pipeline);

  std::string sample_name_;
  std::int64_t source_id_[3] = {0, 0, 0};
  std::string source_name_[3];
  std::size_t chunk_readings_ = 4000;
  double lag_allowance_s_ = 0.0;
  store::Database db_;
  store::Statement select_[3];
  std::deque<Row> buffer_[3];
  bool caught_up_[3] = {false, false, false};
  std::int64_t cursor_[3] = {-1, -1, -1};
  double known_t_[3] = {-1e300, -1e300, -1e300};  // t of the last reading pushed
  int waiting_for_ = -1;
};

}  // namespace lphi::live
