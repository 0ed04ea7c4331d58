// IngestServer's hand-over from lphid's own instrument drivers
// (ingest_server.hpp): one slot per source and a bounded list of instrument
// identities, filled from the drivers' thread, emptied on the ingest thread
// into the same checks and writer path as a batch from the socket.
#include "daemon/ingest/ingest_server.hpp"

#include <spdlog/spdlog.h>
#include <unistd.h>

#include <algorithm>
#include <chrono>

namespace lphi::ingest {

using nlohmann::json;

bool IngestServer::driver_inbox_empty() {
  std::lock_guard lock(inbox_mutex_);
  return std::all_of(inbox_.begin(), inbox_.end(), [](const auto& slot) { return !slot.second; });
}

bool IngestServer::offer_driver_readings(const std::string& source, protocol::Readings&& readings) {
  {
    std::lock_guard lock(inbox_mutex_);
    auto it = inbox_.find(source);
    if (inbox_closed_ || it == inbox_.end() || it->second) return false;
    it->second = std::move(readings);
  }
  const std::uint64_t one = 1;
  [[maybe_unused]] auto r = ::write(wake_fd_, &one, sizeof one);
  return true;
}

void IngestServer::offer_identity(const std::string& source, std::string identity) {
  {
    std::lock_guard lock(inbox_mutex_);
    // Bounded: a driver reconnecting in a tight loop cannot grow this list.
    if (inbox_identities_.size() >= 64) return;
    inbox_identities_.emplace_back(source, std::move(identity));
  }
  const std::uint64_t one = 1;
  [[maybe_unused]] auto r = ::write(wake_fd_, &one, sizeof one);
}

void IngestServer::drain_driver_inbox() {
  std::vector<std::pair<std::string, std::string>> identities;
  {
    std::lock_guard lock(inbox_mutex_);
    identities.swap(inbox_identities_);
  }
  for (auto& [name, identity] : identities) {
    auto it = sources_.find(name);
    if (it == sources_.end()) continue;
    SourceRuntime& s = *it->second;
    if (identity != s.instrument_identity) {
      spdlog::info("source {}: the instrument identifies as \"{}\"", name, identity);
    }
    s.instrument_identity = identity;
    identities_to_store_.emplace_back(&s, std::move(identity));
  }
  Peer driver;
  driver.internal = true;
  for (auto& [name, slot] : inbox_) {
    if (held_) return;  // the writer is full: the drivers wait
    std::optional<protocol::Readings> readings;
    {
      std::lock_guard lock(inbox_mutex_);
      readings.swap(slot);
    }
    if (!readings) continue;
    // The readings go through the same checks as a batch from the socket.
    json array = json::array();
    std::visit(
        [&](const auto& rs) {
          for (const auto& r : rs) array.push_back(protocol::reading_to_json(r));
        },
        *readings);
    accept_readings(driver, *sources_.at(name), std::nullopt, array);
  }
}

void IngestServer::submit_identities() {
  const double now =
      std::chrono::duration<double>(std::chrono::system_clock::now().time_since_epoch()).count();
  while (!identities_to_store_.empty()) {
    auto& [source, identity] = identities_to_store_.front();
    store::WriteJob job;
    job.source_id = source->state.id;
    job.readings = protocol::empty_readings(source->state.kind);
    job.identity = store::InstrumentIdentity{identity, now};
    if (!writer_.try_submit(job)) return;  // the writer is full: later
    identities_to_store_.erase(identities_to_store_.begin());
  }
}

}  // namespace lphi::ingest
