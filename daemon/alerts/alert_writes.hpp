// AlertWrites: the alert engine's queue of store writes on their way to the
// store writer.
//
// Every change the engine stores (an alerts/alert_events row, the progress
// toward a clear, an acknowledgement) becomes one AlertWrite, handed to
// submit() in the order of the changes. AlertWrites promises that a write
// never overtakes one submitted before it, and never waits for the database:
// a write goes to the store writer's queue at once, or, when that queue has
// no room, is kept in order and submitted again by the next call of submit()
// or flush() (the engine calls flush() on every fact, at least once a second).
//
// At its bound (max_kept writes kept) the newest write is dropped: it is
// counted (dropped), logged at most every 10 s, and its `done` gets
// Status::unavailable. A writer that has failed takes nothing more: a write
// is then not kept but counted as an error, and its `done` gets
// Status::unavailable at once. On destruction the kept writes are submitted
// once more; what the writer cannot take is logged as not stored and its
// `done` gets Status::unavailable.
//
// A write's `done` runs on the store writer's thread once the write is
// durable (or refused by the database), or on the caller's thread when it
// is dropped or refused as above.
//
// Thread safety: every public member may be called from any thread; the
// store writer's completions may arrive after the AlertWrites is gone.
#pragma once

#include <cstdint>
#include <deque>
#include <functional>
#include <map>
#include <memory>
#include <mutex>
#include <optional>
#include <string>
#include <vector>

#include "daemon/alerts/alert_engine.hpp"
#include "schema/status.hpp"

namespace lphi::store {
class Database;
class StoreWriter;
}  // namespace lphi::store

namespace lphi::alerts {

// One store write: a task for the writer thread, and what to do when it is
// durable (or refused).
struct AlertWrite {
  std::int64_t alert_id = 0;
  std::string what;  // for the log: "raised", "progress toward the clear", ...
  std::function<Status(store::Database&)> task;
  std::function<void(const Status&)> done;  // optional
  // Set when the write stores the alert's clear: the alert as cleared, which
  // clearing() shows until the write is durable (or not stored).
  std::optional<Alert> cleared;
};

class AlertWrites {
 public:
  struct Counters {
    std::uint64_t errors = 0;    // writes the database or a failed writer refused
    std::uint64_t deferred = 0;  // writes the writer's queue refused at first (kept, retried)
    std::uint64_t dropped = 0;   // writes dropped at max_kept
    std::size_t kept = 0;        // writes kept now
  };

  // `writer` must outlive the AlertWrites.
  AlertWrites(store::StoreWriter& writer, std::size_t max_kept);
  AlertWrites(const AlertWrites&) = delete;
  AlertWrites& operator=(const AlertWrites&) = delete;
  ~AlertWrites();

  // Submits `write` after every write kept before it (see above).
  void submit(AlertWrite write);
  // Submits the kept writes, oldest first, until the writer refuses one.
  void flush();

  // True when the store writer has failed and takes nothing more.
  bool writer_failed() const;

  // Cleared alerts whose clear is not durable yet, by id.
  std::map<std::int64_t, Alert> clearing() const;

  Counters counters() const;

  // Waits until every write submitted so far is durable (or refused by the
  // database), retrying kept ones every 10 ms, or timeout_s passed; true
  // when settled. For tests and tools: the engine never waits.
  bool wait_stored(double timeout_s);

 private:
  struct Tracker;
  bool try_submit(AlertWrite& write);  // under mutex_
  void flush_locked();                 // under mutex_

  store::StoreWriter& writer_;
  const std::size_t max_kept_;
  std::shared_ptr<Tracker> tracker_;  // shared with the writer's completions

  mutable std::mutex mutex_;
  std::deque<AlertWrite> kept_;  // refused by the writer's queue, in order
  std::uint64_t failed_writer_errors_ = 0, deferred_ = 0, dropped_ = 0;
  double last_drop_log_ = 0.0;
};

}  // namespace lphi::alerts
