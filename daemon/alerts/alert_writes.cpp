#include "daemon/alerts/alert_writes.hpp"

#include <algorithm>
#include <chrono>
#include <condition_variable>
#include <utility>

#include <spdlog/spdlog.h>

#include "daemon/store/writer.hpp"

namespace lphi::alerts {

// What the store writer's completions share with the AlertWrites. Held by
// shared_ptr so that a completion arriving after it is gone is safe.
struct AlertWrites::Tracker {
  std::mutex mutex;
  std::condition_variable settled;
  std::size_t in_flight = 0;  // submitted, completion not yet run
  std::uint64_t store_errors = 0;
  // Cleared alerts whose clear is not durable yet: `alerts --all` shows them
  // as they are, not as the database still has them.
  std::map<std::int64_t, Alert> clearing;
};

AlertWrites::AlertWrites(store::StoreWriter& writer, std::size_t max_kept)
    : writer_(writer), max_kept_(max_kept), tracker_(std::make_shared<Tracker>()) {}

AlertWrites::~AlertWrites() {
  std::lock_guard lock(mutex_);
  flush_locked();
  if (kept_.empty()) return;
  spdlog::error("alerts: {} change(s) not stored: the store writer took no more writes", kept_.size());
  for (AlertWrite& w : kept_) {
    if (w.done) w.done(Status::unavailable("lphid is stopping; the change is not stored"));
  }
  kept_.clear();
}

bool AlertWrites::try_submit(AlertWrite& w) {
  store::WriteJob job;
  job.task = w.task;
  job.on_durable = [shared = tracker_, id = w.alert_id, what = w.what, done = w.done,
                    clears = w.cleared.has_value()](const store::WriteResult& r) {
    {
      std::lock_guard lock(shared->mutex);
      if (!r.status) ++shared->store_errors;
      if (clears) shared->clearing.erase(id);
    }
    if (!r.status) spdlog::error("alert {}: cannot store the change ({}): {}", id, what, r.status.message());
    if (done) done(r.status);
    std::lock_guard lock(shared->mutex);
    --shared->in_flight;
    shared->settled.notify_all();
  };
  {
    std::lock_guard lock(tracker_->mutex);
    ++tracker_->in_flight;
  }
  if (writer_.try_submit(job)) return true;
  std::lock_guard lock(tracker_->mutex);
  --tracker_->in_flight;
  return false;
}

void AlertWrites::flush_locked() {
  while (!kept_.empty() && try_submit(kept_.front())) kept_.pop_front();
}

void AlertWrites::flush() {
  std::lock_guard lock(mutex_);
  flush_locked();
}

void AlertWrites::submit(AlertWrite w) {
  std::lock_guard lock(mutex_);
  if (w.cleared) {
    std::lock_guard tracked(tracker_->mutex);
    tracker_->clearing[w.alert_id] = *w.cleared;
  }
  flush_locked();
  if (kept_.empty() && try_submit(w)) return;
  auto not_stored = [&](std::string_view why) {
    if (w.cleared) {
      std::lock_guard tracked(tracker_->mutex);
      tracker_->clearing.erase(w.alert_id);
    }
    if (w.done) w.done(Status::unavailable(std::string(why)));
  };
  if (writer_.failed()) {
    // Not a full queue but a writer that takes nothing more: keeping the
    // change would only delay the same answer.
    ++failed_writer_errors_;
    spdlog::error("alert {}: the change ({}) is not stored: the store writer has failed", w.alert_id, w.what);
    not_stored("the store writer has failed; the change is not stored");
    return;
  }
  if (kept_.size() >= max_kept_) {
    ++dropped_;
    const double now =
        std::chrono::duration<double>(std::chrono::system_clock::now().time_since_epoch()).count();
    if (now - last_drop_log_ >= 10.0) {
      last_drop_log_ = now;
      spdlog::error("alert {}: the change ({}) is not stored: the store writer took no write for a "
                    "while and {} are waiting ({} dropped so far)",
                    w.alert_id, w.what, kept_.size(), dropped_);
    }
    not_stored("the store writer has no room; the change is not stored");
    return;
  }
  if (deferred_++ % 1000 == 0) {
    spdlog::warn("alerts: the store writer's queue is full; {} change(s) kept to be stored later",
                 kept_.size() + 1);
  }
  kept_.push_back(std::move(w));
}

bool AlertWrites::writer_failed() const { return writer_.failed(); }

std::map<std::int64_t, Alert> AlertWrites::clearing() const {
  std::lock_guard lock(tracker_->mutex);
  return tracker_->clearing;
}

AlertWrites::Counters AlertWrites::counters() const {
  Counters out;
  {
    std::lock_guard lock(mutex_);
    out.errors = failed_writer_errors_;
    out.deferred = deferred_;
    out.dropped = dropped_;
    out.kept = kept_.size();
  }
  std::lock_guard lock(tracker_->mutex);
  out.errors += tracker_->store_errors;
  return out;
}

bool AlertWrites::wait_stored(double timeout_s) {
  const auto deadline =
      std::chrono::steady_clock::now() +
      std::chrono::duration_cast<std::chrono::steady_clock::duration>(std::chrono::duration<double>(timeout_s));
  while (true) {
    bool kept = false;
    {
      std::lock_guard lock(mutex_);
      flush_locked();
      kept = !kept_.empty();
    }
    std::unique_lock lock(tracker_->mutex);
    // Kept writes are retried every 10 ms; submitted ones are waited for.
    const auto until = std::min(deadline, std::chrono::steady_clock::now() + std::chrono::milliseconds(10));
    if (tracker_->settled.wait_until(lock, until, [&] { return !kept && tracker_->in_flight == 0; })) {
      return true;
    }
    if (std::chrono::steady_clock::now() >= deadline) return false;
  }
}

}  // namespace lphi::alerts
