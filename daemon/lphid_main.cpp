// lphid: ingests readings into the data directory's database, analyses them
// live (sweeps, fits, the L_phi(T) verdict), raises alerts, publishes events
// and answers queries. See daemon/PROTOCOL.md for the sockets and the config.
#include <signal.h>
#include <systemd/sd-daemon.h>
#include <unistd.h>

#include <CLI/CLI.hpp>
#include <atomic>
#include <filesystem>
#include <iostream>
#include <spdlog/sinks/rotating_file_sink.h>
#include <spdlog/sinks/stdout_color_sinks.h>
#include <spdlog/spdlog.h>
#include <zmq.hpp>

#include "daemon/alerts/alert_engine.hpp"
#include "daemon/alerts/event_publisher.hpp"
#include "daemon/config/config.hpp"
#include "daemon/config/data_dir.hpp"
#include "daemon/control/analysis_queries.hpp"
#include "daemon/control/control_server.hpp"
#include "daemon/health/failed_parts.hpp"
#include "daemon/health/health_monitor.hpp"
#include "daemon/health/status_reply.hpp"
#include "daemon/ingest/driver_host.hpp"
#include "daemon/ingest/ingest_server.hpp"
#include "daemon/live/live_analysis.hpp"
#include "daemon/store/writer.hpp"

namespace {

std::atomic<bool> stop_requested{false};
static_assert(std::atomic<bool>::is_always_lock_free);

void on_signal(int) { stop_requested.store(true); }

int check_config(const std::string& path) {
  lphi::config::Config config;
  const auto errors = lphi::config::load_config_file(path, config);
  for (const auto& e : errors) std::cerr << lphi::config::format_error(path, e) << "\n";
  if (!errors.empty()) return 1;
  std::cout << path << ": ok (" << config.sources.size() << " sources, " << config.samples.size()
            << " samples)\n";
  return 0;
}

void set_up_logging(const std::string& mode, const std::string& dir, const std::string& level) {
  const bool console = mode == "console" || (mode == "auto" && ::isatty(STDERR_FILENO) == 1);
  std::shared_ptr<spdlog::logger> logger;
  if (console) {
    logger = spdlog::stderr_color_mt("lphid");
  } else {
    // 10 MB per file, 5 files: weeks of normal operation, bounded on disk.
    logger = spdlog::rotating_logger_mt("lphid", (std::filesystem::path(dir) / "lphid.log").string(),
                                        10u << 20, 5);
    logger->flush_on(spdlog::level::warn);
  }
  logger->set_level(spdlog::level::from_str(level));
  spdlog::set_default_logger(logger);
  spdlog::flush_every(std::chrono::seconds(2));
}

int serve(const std::string& dir_option, const std::string& config_option, const std::string& log_mode) {
  const auto dir_found = lphi::config::resolve_data_dir(dir_option);
  if (!dir_found) {
    std::cerr << "lphid: give the data directory with --data-dir DIR (or LPHI_DATA_DIR)\n";
    return 2;
  }
  const std::string dir = lphi::config::absolute_data_dir(*dir_found);

  lphi::config::Config config;
  std::string config_path = config_option;
  if (config_path.empty() && std::filesystem::exists(std::filesystem::path(dir) / "lphid.toml")) {
    config_path = (std::filesystem::path(dir) / "lphid.toml").string();
  }
  if (!config_path.empty()) {
    const auto errors = lphi::config::load_config_file(config_path, config);
    for (const auto& e : errors) std::cerr << "lphid: " << lphi::config::format_error(config_path, e) << "\n";
    if (!errors.empty()) return 2;
  }

  lphi::config::InstanceLock lock;
  if (auto e = lock.acquire(dir)) {
    std::cerr << "lphid: " << *e << "\n";
    return 1;
  }
  try {
    set_up_logging(log_mode, dir, config.log_level);
  } catch (const spdlog::spdlog_ex& e) {
    std::cerr << "lphid: cannot set up logging: " << e.what() << "\n";
    return 1;
  }
  if (config_path.empty()) spdlog::warn("no config (--config or {}/lphid.toml): no sources, every batch will be refused", dir);
  if (config.sources.empty()) spdlog::warn("no sources are configured");

  lphi::store::WriterOptions wo;
  wo.commit_max_readings = static_cast<std::size_t>(config.commit_max_readings);
  wo.commit_max_time = std::chrono::milliseconds(config.commit_max_ms);
  wo.queue_max_readings = static_cast<std::size_t>(config.queue_max_readings);
  wo.checkpoint_interval = std::chrono::milliseconds(config.checkpoint_interval_ms);
  wo.synchronous = config.synchronous_full ? lphi::store::Synchronous::full : lphi::store::Synchronous::normal;
  std::unique_ptr<lphi::store::StoreWriter> writer;
  if (auto s = lphi::store::StoreWriter::open(lphi::store::database_path(dir), wo, writer); !s) {
    spdlog::critical("{}", s.message());
    std::cerr << "lphid: " << s.message() << "\n";
    return 1;
  }
  std::map<std::string, lphi::store::SourceState> sources;
  for (const auto& src : config.sources) {
    lphi::store::SourceState state;
    if (auto s = writer->register_source(src.name, src.kind, state); !s) {
      spdlog::critical("{}", s.message());
      std::cerr << "lphid: " << s.message() << "\n";
      return 1;
    }
    sources[src.name] = state;
  }
  for (const auto& smp : config.samples) {
    lphi::store::SampleRow row{smp.name, smp.model, smp.squares, smp.width_m, smp.thickness_m,
                               smp.excitation_a, smp.lockin, smp.thermometer, smp.field,
                               smp.gain, smp.diffusion_m2s, smp.mean_free_path_m, smp.alpha_fixed};
    if (auto s = writer->register_sample(row); !s) {
      spdlog::critical("{}", s.message());
      std::cerr << "lphid: " << s.message() << "\n";
      return 1;
    }
  }

  struct sigaction sa {};
  sa.sa_handler = on_signal;
  sigemptyset(&sa.sa_mask);
  sigaction(SIGTERM, &sa, nullptr);
  sigaction(SIGINT, &sa, nullptr);
  signal(SIGPIPE, SIG_IGN);

  writer->start();
  zmq::context_t context(1);
  lphi::ingest::IngestOptions io;
  io.endpoints = lphi::config::daemon_endpoints(dir, config.ingest_endpoint, config.control_endpoint,
                                                  config.events_endpoint);
  io.data_dir = dir;
  io.limits = config.limits;
  io.time_backward_tolerance_s = config.time_backward_tolerance_s;
  io.time_future_tolerance_s = config.time_future_tolerance_s;
  for (const auto& src : config.sources) {
    if (src.time_future_tolerance_s) io.source_future_tolerance_s[src.name] = *src.time_future_tolerance_s;
    if (src.driver != lphi::config::DriverType::none) io.driver_sources.insert(src.name);
  }
  std::unique_ptr<lphi::ingest::IngestServer> server;
  if (auto s = lphi::ingest::IngestServer::create(context, io, *writer, sources, server); !s) {
    spdlog::critical("{}", s.message());
    std::cerr << "lphid: " << s.message() << "\n";
    writer->stop();
    return 1;
  }
  lphi::ingest::DriverHost drivers;
  if (auto s = drivers.create(config, sources, *server); !s) {
    spdlog::critical("{}", s.message());
    std::cerr << "lphid: " << s.message() << "\n";
    server.reset();
    writer->stop();
    return 1;
  }

  // The event socket, the alert engine, the live analysis, health and control.
  auto fail = [&](const std::string& message) {
    spdlog::critical("{}", message);
    std::cerr << "lphid: " << message << "\n";
    server.reset();
    writer->stop();
    return 1;
  };
  if (auto e = lphi::config::prepare_ipc_endpoint(io.endpoints.events)) return fail(*e);
  std::unique_ptr<lphi::alerts::EventPublisher> events;
  if (auto s = lphi::alerts::EventPublisher::create(context, io.endpoints.events, events); !s) {
    return fail(s.message());
  }
  io.endpoints.events = events->endpoint();
  if (auto e = lphi::config::restrict_ipc_endpoint(io.endpoints.events)) spdlog::warn("{}", *e);
  std::unique_ptr<lphi::alerts::AlertEngine> engine;
  // After the writer applied the migrations: the engine reads the live
  // alerts on a read-only connection and writes through the writer.
  if (auto s = lphi::alerts::AlertEngine::create(config.alerts, *writer, lphi::store::database_path(dir), events.get(),
                                                  engine);
      !s) {
    return fail(s.message());
  }
  lphi::health::FailedParts failed_parts;
  lphi::live::LiveOptions lo;
  lo.data_dir = dir;
  lo.writer = writer.get();
  lo.failed_parts = &failed_parts;
  std::unique_ptr<lphi::live::LiveAnalysis> live;
  if (auto s = lphi::live::LiveAnalysis::create(config, lo, engine.get(), events.get(), live); !s) {
    return fail(s.message());
  }
  std::unique_ptr<lphi::health::HealthMonitor> health;
  if (auto s = lphi::health::HealthMonitor::create(dir, engine.get(), health); !s) return fail(s.message());
  server->set_tick_handler([&health](const lphi::ingest::IngestStatus& status) { health->on_tick(status); });

  std::unique_ptr<lphi::control::AnalysisQueries> queries;
  if (auto s = lphi::control::AnalysisQueries::create(config, dir, *live, queries); !s) return fail(s.message());
  std::unique_ptr<lphi::control::ControlServer> control;
  if (auto s = lphi::control::ControlServer::create(context, io.endpoints.control, config.limits, control); !s) {
    return fail(s.message());
  }
  control->add_handler("status", [&](const nlohmann::json&) {
    lphi::health::DaemonStatus st;
    st.ingest = server->status();
    if (drivers.size() > 0) st.drivers = drivers.status_json();
    st.failed_parts = failed_parts.list();
    // The hook's thread belongs to the engine, which keeps its failure.
    if (const auto c = engine->counters(); !c.hook_failed.empty()) {
      st.failed_parts.push_back({"alert-hook", c.hook_failed, 0.0});
    }
    for (const auto& sample : config.samples) {
      if (const auto* w = live->find(sample.name)) st.samples.push_back(w->progress().counts);
    }
    st.database_bytes = lphi::health::database_bytes(dir);
    st.pid = ::getpid();
    st.now_unix = std::chrono::duration<double>(std::chrono::system_clock::now().time_since_epoch()).count();
    return lphi::health::status_reply(st);
  });
  for (const auto& type : lphi::control::AnalysisQueries::request_types()) {
    control->add_handler(type, [&queries](const nlohmann::json& r) { return queries->handle_request(r); });
  }
  for (const char* type : {"alerts", "ack"}) {
    // An ack is answered once it is durable, without blocking the control socket.
    control->add_deferred_handler(type, [&engine](const nlohmann::json& r, lphi::control::Reply reply) {
      engine->handle_request(r, [reply](nlohmann::json answer) { reply.send(answer); });
    });
  }

  if (auto e = lphi::config::write_endpoints_file(dir, io.endpoints)) spdlog::warn("{}", *e);
  spdlog::info("lphid {} serving {} (ingest {}, control {}, events {}, {} sources, {} samples, {} drivers)",
               ::getpid(), dir, io.endpoints.ingest, io.endpoints.control, io.endpoints.events,
               sources.size(), config.samples.size(), drivers.size());
  live->start();
  drivers.start(&failed_parts);
  control->start(&failed_parts);
  sd_notify(0, "READY=1");
  // The ingest loop runs on this thread. If it throws, lphid cannot take
  // readings any more: it is marked failed and lphid stops in order (the
  // writer commits what it queued; senders resend what was not acknowledged)
  // with a non-zero exit, for the service manager to restart it, rather than
  // serving queries without ingesting.
  const bool ingest_ok =
      lphi::health::run_guarded(&failed_parts, "ingest", [&] { server->run(stop_requested); });
  // Control first (its handlers use everything below); the drivers before the
  // server they hand readings to goes away; the analysis before the engine
  // and the publisher it reports to.
  control.reset();
  queries.reset();
  drivers.stop();
  live->stop();
  live.reset();
  health.reset();
  engine.reset();
  events.reset();
  server.reset();
  writer.reset();
  if (!ingest_ok) {
    spdlog::critical("lphid stopped: its ingest failed");
    spdlog::shutdown();
    return 1;
  }
  spdlog::info("lphid stopped");
  spdlog::shutdown();
  return 0;
}

}  // namespace

int main(int argc, char** argv) {
  CLI::App app{"lphid: stores lock-in, thermometer and field readings, acknowledged after commit"};
  std::string data_dir, config_path, check_path, log_mode = "auto";
  bool print_example = false;
  app.add_option("--data-dir", data_dir, "the instance directory (database, sockets, logs, lock); default $LPHI_DATA_DIR");
  app.add_option("--config", config_path, "the TOML config (default: DIR/lphid.toml if present)");
  app.add_flag("--print-example-config", print_example, "print a complete, commented config and exit");
  app.add_option("--check-config", check_path, "validate a config file and exit");
  app.add_option("--log", log_mode, "console, file (DIR/lphid.log, rotating) or auto (console when stderr is a terminal)")
      ->check(CLI::IsMember({"auto", "console", "file"}));
  CLI11_PARSE(app, argc, argv);
  if (print_example) {
    std::cout << lphi::config::example_config();
    return 0;
  }
  if (!check_path.empty()) return check_config(check_path);
  return serve(data_dir, config_path, log_mode);
}
