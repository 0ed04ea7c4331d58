#include "daemon/live/live_analysis.hpp"

namespace lphi::live {

Status LiveAnalysis::create(const config::Config& config, const LiveOptions& options, alerts::AlertEngine* engine,
                            alerts::EventPublisher* events, std::unique_ptr<LiveAnalysis>& out) {
  if (options.writer == nullptr) {
    return Status::invalid_input("the live analysis needs the store writer (LiveOptions::writer)");
  }
  std::unique_ptr<LiveAnalysis> a(new LiveAnalysis());
  for (const auto& sample : config.samples) {
    std::unique_ptr<SampleWorker> w;
    if (auto s = SampleWorker::create(sample, options, engine, events, a->stopping_, w); !s) return s;
    a->workers_.push_back(std::move(w));
  }
  out = std::move(a);
  return Status::success();
}

LiveAnalysis::~LiveAnalysis() { stop(); }

void LiveAnalysis::start() {
  for (auto& w : workers_) w->start();
}

void LiveAnalysis::stop() {
  stopping_.store(true);
  for (auto& w : workers_) w->wake();
  for (auto& w : workers_) w->join();
}

const SampleWorker* LiveAnalysis::find(const std::string& name) const {
  for (const auto& w : workers_) {
    if (w->name() == name) return w.get();
  }
  return nullptr;
}

}  // namespace lphi::live
