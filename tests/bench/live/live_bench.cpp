// Prints lphi's live-analysis figures (not a test; nothing is asserted):
// a long cooldown of lphi-sim's saturating film at 20 Hz (by default four
// weeks: ~4.8e7 lock-in readings, as many field readings, a thermometer
// reading a second), generated in-process from the lphi-sim world model and
// sent into a real lphid as fast as the ingest accepts it with the
// lphi_sender library; then the wait until the analysis is idle. Reports
// readings/s, the wall times, the sweeps and fits, the analysis time per
// fitted sweep and lphid's memory. With --restart, lphid is then started
// again on the full data directory and the time until its analysis is idle
// again is reported (a restart re-segments the stored readings and reuses
// the stored fits).
//
// The programme is saturation.toml's ten plateaus with as many 1000 s sweeps
// each as fill --days. The lock-in's output filter is switched off
// (time_constant_s = 0): it costs 48 model evaluations a reading in the
// simulator, and this benchmark measures lphid, not lphi-sim.
//
// Usage: live_bench [--days D] [--rate-hz R] [--dir DIR] [--restart]
#include <signal.h>
#include <spawn.h>
#include <sys/wait.h>
#include <unistd.h>

#include <algorithm>
#include <chrono>
#include <cerrno>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <nlohmann/json.hpp>
#include <optional>
#include <string>
#include <thread>
#include <vector>
#include <zmq.hpp>

#include "daemon/config/data_dir.hpp"
#include "drivers/sender/sender.hpp"
#include "drivers/sim/instruments.hpp"
#include "drivers/sim/recording.hpp"
#include "drivers/sim/scenario_file.hpp"

extern char** environ;

namespace {

using Clock = std::chrono::steady_clock;
using namespace lphi;
using namespace std::chrono_literals;

constexpr double kEpoch = 1.7e9;  // readings carry Unix times from here (2023-11-14)

double seconds_since(Clock::time_point t) { return std::chrono::duration<double>(Clock::now() - t).count(); }

long status_kb(pid_t pid, const char* key) {
  std::ifstream in("/proc/" + std::to_string(pid) + "/status");
  std::string line;
  const std::size_t n = std::strlen(key);
  while (std::getline(in, line))
    if (line.compare(0, n, key) == 0) return std::stol(line.substr(n));
  return -1;
}

// saturation.toml stretched to `days`: the same ten plateaus, each with as
// many sweeps as its share of the time holds.
std::optional<sim::Scenario> long_cooldown(double days) {
  auto loaded = sim::load_scenario_file(std::string(LPHI_SOURCE_DIR) + "/drivers/sim/scenarios/saturation.toml");
  if (!loaded.scenario) {
    std::fprintf(stderr, "live_bench: %s\n", loaded.error.c_str());
    return std::nullopt;
  }
  sim::Scenario s = *loaded.scenario;
  s.lockin.time_constant_s = 0.0;
  const double share_s = days * 86400.0 / static_cast<double>(s.programme.plateaus.size());
  for (sim::Plateau& p : s.programme.plateaus) {
    const double sweep_s = 2.0 * p.max_field_t / p.rate_t_per_s;
    const double fixed_s = p.ramp_s + p.dwell_s + sweep_s;  // ramp, dwell, 0 -> -B and +-B -> 0
    p.sweeps = std::max(2, static_cast<int>(std::floor((share_s - fixed_s) / sweep_s)));
  }
  return s;
}

pid_t start_daemon(const std::string& dir) {
  const std::string config = dir + "/lphid.toml";
  std::ofstream(config) << "[daemon]\nlog_level = \"warn\"\n"
                           "[[source]]\nname = \"lockin\"\nkind = \"lockin\"\n"
                           "[[source]]\nname = \"mxc\"\nkind = \"thermometer\"\n"
                           "[[source]]\nname = \"magnet\"\nkind = \"field\"\n"
                           "[[sample]]\nname = \"film\"\nmodel = \"hln2d\"\nsquares = 5.0\n"
                           "width_m = 20e-6\nthickness_m = 10e-9\nexcitation_a = 10e-9\ngain = 100.0\n"
                           "lockin = \"lockin\"\nthermometer = \"mxc\"\nfield = \"magnet\"\n"
                           "sweep_min_span_t = 0.015\nreversal_tolerance_t = 1e-4\n"
                           "plateau_relative_spread = 0.03\n";
  std::vector<std::string> args = {LPHID_PATH, "--data-dir", dir, "--config", config, "--log", "file"};
  std::vector<char*> argv;
  for (auto& a : args) argv.push_back(a.data());
  argv.push_back(nullptr);
  pid_t pid = -1;
  if (posix_spawn(&pid, argv[0], nullptr, nullptr, argv.data(), environ) != 0) return -1;
  return pid;
}

class Control {
 public:
  explicit Control(const std::string& dir) : socket_(context_, zmq::socket_type::dealer) {
    socket_.set(zmq::sockopt::linger, 0);
    socket_.connect(config::client_endpoints(dir).control);
  }
  std::optional<nlohmann::json> ask(const nlohmann::json& request, std::chrono::milliseconds timeout = 2000ms) {
    const std::string text = request.dump();
    socket_.send(zmq::buffer(text), zmq::send_flags::none);
    zmq::pollitem_t item{socket_.handle(), 0, ZMQ_POLLIN, 0};
    zmq::poll(&item, 1, timeout);
    zmq::message_t reply;
    if (!(item.revents & ZMQ_POLLIN) || !socket_.recv(reply, zmq::recv_flags::dontwait)) return std::nullopt;
    auto j = nlohmann::json::parse(reply.to_string_view(), nullptr, false);
    if (j.is_discarded()) return std::nullopt;
    return j;
  }

 private:
  zmq::context_t context_{1};
  zmq::socket_t socket_;
};

struct Sample {
  double wall_s;
  long long fits;
  long long sweeps;
};

// --restart: lphid started again on the full data directory, as after a
// power cut or an upgrade in week four. Reports the time until it answers,
// the time until the analysis of the stored readings is idle again, and how
// many fits it reused rather than refitted.
int measure_restart(const std::string& dir, std::size_t planned) {
  std::printf("restart: lphid started again on %s\n", dir.c_str());
  std::fflush(stdout);
  const auto began = Clock::now();
  const pid_t pid = start_daemon(dir);
  if (pid <= 0) {
    std::fprintf(stderr, "live_bench: cannot start %s again\n", LPHID_PATH);
    return 1;
  }
  Control control(dir);
  double answered_s = -1;
  for (int i = 0; i < 3000; ++i) {
    if (control.ask({{"type", "status"}}, 200ms)) {
      answered_s = seconds_since(began);
      break;
    }
  }
  std::optional<nlohmann::json> last;
  long rss_max_kb = 0;
  const double limit_s = 3600;
  while (seconds_since(began) < limit_s) {
    last = control.ask({{"type", "progress"}, {"sample", "film"}});
    rss_max_kb = std::max(rss_max_kb, status_kb(pid, "VmRSS:"));
    if (last && last->value("idle", false)) break;
    std::this_thread::sleep_for(200ms);
  }
  const double idle_s = seconds_since(began);
  if (!last || !last->value("idle", false)) {
    std::printf("restart: the analysis was not idle after %.0f s; last progress reply: %s\n", limit_s,
                last ? last->dump().c_str() : "(none)");
  } else {
    std::printf("restart: control answered after %.2f s; analysis idle after %.1f s; sweeps %lld, fits %lld, "
                "of which reused %lld (%zu planned)\n",
                answered_s, idle_s, last->value("sweeps", 0LL), last->value("fits", 0LL),
                last->value("fits_reused", 0LL), planned);
  }
  std::printf("restart: lphid RSS peak %ld kB (VmHWM), largest sampled %ld kB\n", status_kb(pid, "VmHWM:"),
              rss_max_kb);
  ::kill(pid, SIGTERM);
  int st = 0;
  ::waitpid(pid, &st, 0);
  return last && last->value("idle", false) ? 0 : 1;
}

}  // namespace

int main(int argc, char** argv) {
  double days = 28.0, rate_hz = 20.0;
  std::string dir;
  bool restart = false;
  for (int i = 1; i < argc; ++i) {
    const std::string a = argv[i];
    if (a == "--restart") {
      restart = true;
      continue;
    }
    if (i + 1 >= argc) {
      std::fprintf(stderr, "live_bench: %s needs a value\nusage: live_bench [--days D] [--rate-hz R] [--dir DIR] [--restart]\n", a.c_str());
      return 2;
    }
    if (a == "--days") days = std::atof(argv[++i]);
    else if (a == "--rate-hz") rate_hz = std::atof(argv[++i]);
    else if (a == "--dir") dir = argv[++i];
    else {
      std::fprintf(stderr, "live_bench: unknown option %s\nusage: live_bench [--days D] [--rate-hz R] [--dir DIR] [--restart]\n", a.c_str());
      return 2;
    }
  }
  if (!(days > 0 && days <= 60) || !(rate_hz > 0 && rate_hz <= 100)) {
    std::fprintf(stderr, "live_bench: --days must be in (0, 60] and --rate-hz in (0, 100]\n");
    return 2;
  }
  if (dir.empty()) {
    char pattern[] = "/tmp/lphi-live-bench-XXXXXX";
    if (::mkdtemp(pattern) == nullptr) {
      std::fprintf(stderr, "live_bench: cannot make a directory in /tmp: %s\n", std::strerror(errno));
      return 1;
    }
    dir = pattern;
  } else {
    std::error_code ec;
    std::filesystem::create_directories(dir, ec);
    if (ec) {
      std::fprintf(stderr, "live_bench: cannot make %s: %s\n", dir.c_str(), ec.message().c_str());
      return 1;
    }
  }
  auto scenario = long_cooldown(days);
  if (!scenario) return 1;
  sim::World world(*scenario);
  const sim::SimInstrument lockin(sim::Instrument::lockin, world, 1.0);
  sim::RecordingOptions ro;
  ro.rate_hz = rate_hz;
  ro.thermometer_every = std::max<std::int64_t>(1, std::llround(rate_hz));  // 1 Hz
  const sim::Recorder recorder(world, ro, lockin.range_v(), 0.0);
  std::printf("live_bench: %.3g days at %g Hz: %lld rows, %zu sweeps planned, in %s\n", days, rate_hz,
              static_cast<long long>(recorder.rows()), world.schedule().sweeps().size(), dir.c_str());
  std::fflush(stdout);

  const pid_t pid = start_daemon(dir);
  if (pid <= 0) {
    std::fprintf(stderr, "live_bench: cannot start %s\n", LPHID_PATH);
    return 1;
  }
  Control control(dir);
  for (int i = 0; i < 300 && !control.ask({{"type", "status"}}, 200ms); ++i) {
  }

  zmq::context_t context(1);
  auto options = [&](const char* source, protocol::SourceKind kind) {
    drivers::SenderOptions o;
    o.endpoint = config::client_endpoints(dir).ingest;
    o.source = source;
    o.kind = kind;
    o.batch_max_readings = 5000;
    o.max_batches_in_flight = 8;
    o.spool_max_readings = 100000;
    o.ack_timeout = 30000ms;
    return o;
  };
  drivers::Sender to_lockin(context, options("lockin", protocol::SourceKind::lockin));
  drivers::Sender to_mxc(context, options("mxc", protocol::SourceKind::thermometer));
  drivers::Sender to_magnet(context, options("magnet", protocol::SourceKind::field));
  auto pump_all = [&] {
    to_lockin.pump(0ms);
    to_mxc.pump(0ms);
    to_magnet.pump(1ms);
  };

  std::vector<Sample> samples;
  long rss_max_kb = 0;
  auto sample_progress = [&](const Clock::time_point& began) -> std::optional<nlohmann::json> {
    auto p = control.ask({{"type", "progress"}, {"sample", "film"}});
    rss_max_kb = std::max(rss_max_kb, status_kb(pid, "VmRSS:"));
    if (p && p->contains("fits"))
      samples.push_back({seconds_since(began), p->value("fits", 0LL), p->value("sweeps", 0LL)});
    return p;
  };

  const auto began = Clock::now();
  auto last_sample = began;
  std::int64_t seq_lockin = 0, seq_mxc = 0, seq_magnet = 0;
  for (std::int64_t k = 0; k < recorder.rows(); ++k) {
    const sim::RecordedRow row = recorder.row(k);
    const double t = kEpoch + row.t_s;
    protocol::FieldReading b;
    b.seq = ++seq_magnet;
    b.t = t;
    b.field_t = row.field_t;
    while (!to_magnet.offer(b)) pump_all();
    if (row.has_temperature) {
      protocol::ThermometerReading th;
      th.seq = ++seq_mxc;
      th.t = t;
      th.temperature_k = row.temperature_k;
      while (!to_mxc.offer(th)) pump_all();
    }
    if (row.has_lockin) {
      protocol::LockinReading x;
      x.seq = ++seq_lockin;
      x.t = t;
      x.x_v = row.lockin.x_v;
      x.y_v = row.lockin.y_v;
      x.overload = row.lockin.overload;
      while (!to_lockin.offer(x)) pump_all();
    }
    if ((k & 0xfff) == 0) {
      pump_all();
      if (seconds_since(last_sample) > 1.0) {
        last_sample = Clock::now();
        sample_progress(began);
      }
    }
  }
  const bool flushed = to_lockin.flush(600s) && to_mxc.flush(600s) && to_magnet.flush(600s);
  const double send_s = seconds_since(began);
  const auto readings = static_cast<double>(seq_lockin + seq_mxc + seq_magnet);
  std::printf("sent and acknowledged: %lld lock-in, %lld thermometer, %lld field readings in %.1f s = %.0f readings/s%s\n",
              static_cast<long long>(seq_lockin), static_cast<long long>(seq_mxc),
              static_cast<long long>(seq_magnet), send_s, readings / send_s,
              flushed ? "" : " (NOT all acknowledged)");
  std::printf("rejected %llu, resends %llu\n",
              static_cast<unsigned long long>(to_lockin.totals().rejected + to_mxc.totals().rejected +
                                              to_magnet.totals().rejected),
              static_cast<unsigned long long>(to_lockin.totals().resends + to_mxc.totals().resends +
                                              to_magnet.totals().resends));
  std::fflush(stdout);

  // Wait for idle; give up when the progress reply has not changed for
  // stall_s (the analysis is stuck, or waits for readings that will not come).
  std::optional<nlohmann::json> last;
  const double stall_s = 120;
  std::string last_state;
  auto stall_since = Clock::now();
  while (seconds_since(stall_since) < stall_s) {
    last = sample_progress(began);
    if (last && last->value("idle", false)) break;
    const std::string state = last ? last->dump() : "";
    if (state != last_state) {
      last_state = state;
      stall_since = Clock::now();
    }
    std::this_thread::sleep_for(200ms);
  }
  const double total_s = seconds_since(began);
  if (!last || !last->value("idle", false)) {
    std::printf("the analysis did not report idle (no change for %.0f s); last progress reply: %s\n", stall_s,
                last ? last->dump().c_str() : "(none)");
  }
  const long long fits = last ? last->value("fits", 0LL) : 0;
  const long long sweeps = last ? last->value("sweeps", 0LL) : 0;
  if (last && last->value("idle", false)) {
    std::printf("analysis idle %.1f s after the last acknowledgement; wall time %.1f s in all = %.0f readings/s "
                "analysed\n", total_s - send_s, total_s, readings / total_s);
  } else {
    std::printf("gave up waiting %.1f s after the last acknowledgement (wall time %.1f s in all)\n",
                total_s - send_s, total_s);
  }
  std::printf("sweeps %lld, fits %lld (%zu sweeps planned)\n", sweeps, fits, world.schedule().sweeps().size());
  // Analysis time per fitted sweep from the fits' count over time: between
  // the first and the last progress sample at which the count changed.
  std::optional<Sample> first_change, last_change;
  for (std::size_t i = 1; i < samples.size(); ++i) {
    if (samples[i].fits != samples[i - 1].fits) {
      if (!first_change) first_change = samples[i - 1];
      last_change = samples[i];
    }
  }
  if (first_change && last_change && last_change->fits > first_change->fits) {
    const double per = (last_change->wall_s - first_change->wall_s) /
                       static_cast<double>(last_change->fits - first_change->fits);
    std::printf("fit throughput: %lld fits in %.1f s of wall time = %.1f ms per sweep (an upper bound on the "
                "fit latency: it includes reading and segmenting each sweep's readings)\n",
                last_change->fits - first_change->fits, last_change->wall_s - first_change->wall_s, 1e3 * per);
  }
  if (last) {
    nlohmann::json extra = *last;
    for (const char* k : {"type", "sample", "sources", "idle", "sweeps", "fits"}) extra.erase(k);
    if (!extra.empty()) std::printf("progress also reports: %s\n", extra.dump().c_str());
  }
  std::printf("lphid RSS: peak %ld kB (VmHWM), largest sampled %ld kB\n", status_kb(pid, "VmHWM:"), rss_max_kb);
  std::uintmax_t bytes = 0;
  for (const auto& e : std::filesystem::directory_iterator(dir))
    if (e.is_regular_file()) bytes += e.file_size();
  std::printf("data directory: %.1f MB\n", static_cast<double>(bytes) / 1e6);
  ::kill(pid, SIGTERM);
  int st = 0;
  ::waitpid(pid, &st, 0);
  if (restart) return measure_restart(dir, world.schedule().sweeps().size());
  return 0;
}
