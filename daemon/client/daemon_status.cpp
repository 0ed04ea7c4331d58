// lphi status: what lphid reports about itself, its sources and its writer.

#include <fmt/format.h>
#include <chrono>
#include <cstdint>
#include <cstdio>
#include <iostream>
#include <nlohmann/json.hpp>
#include <zmq.hpp>

#include "daemon/client/daemon_locate.hpp"
#include "daemon/client/exit_codes.hpp"

namespace lphi::client {

namespace {

using nlohmann::json;

std::string fixed(double v, int digits) {
  return fmt::format("{:.{}f}", v, digits);
}

std::string value_or_dash(const json& v, int digits) {
  return v.is_number() ? fixed(v.get<double>(), digits) : std::string("-");
}

void print_human(const json& s) {
  std::cout << "lphid pid " << s.value("pid", 0) << ", up " << fixed(s.value("uptime_s", 0.0), 0)
            << " s, database " << fixed(s.value("database_bytes", 0.0) / 1e6, 1) << " MB\n";
  const auto& w = s.at("writer");
  std::cout << "writer: " << w.value("queued_readings", std::uint64_t{0}) << " readings queued, lag "
            << fixed(w.value("lag_s", 0.0), 3) << " s, " << w.value("commits", std::uint64_t{0}) << " commits, p99.9 "
            << fixed(w.value("commit_p999_s", 0.0) * 1e3, 2) << " ms"
            << (w.value("backpressure", false) ? ", back-pressure ON" : "") << "\n";
  if (w.value("failed", false)) {
    std::cout << "writer FAILED, nothing is written any more (restart lphid): " << w.value("last_error", "")
              << "\n";
  }
  const auto& c = s.at("counters");
  std::cout << "readings: " << c.value("accepted", std::uint64_t{0}) << " accepted, " << c.value("duplicates", std::uint64_t{0})
            << " duplicates, " << c.value("gaps", std::uint64_t{0}) << " gaps\n";
  for (const char* group : {"rejected_readings", "refused_messages"}) {
    if (c.contains(group) && !c.at(group).empty()) {
      std::cout << (std::string(group) == "rejected_readings" ? "rejected readings:" : "refused messages:");
      for (const auto& [reason, n] : c.at(group).items()) std::cout << " " << reason << "=" << n;
      std::cout << "\n";
    }
  }
  std::printf("%-20s %-12s %14s %10s %10s %12s\n", "source", "kind", "last t", "age s", "rate/s", "accepted");
  for (const auto& src : s.at("sources")) {
    std::printf("%-20s %-12s %14s %10s %10s %12llu\n", src.value("name", "").c_str(),
                src.value("kind", "").c_str(), value_or_dash(src.at("last_t"), 3).c_str(),
                value_or_dash(src.at("age_s"), 1).c_str(), fixed(src.value("rate_per_s", 0.0), 1).c_str(),
                static_cast<unsigned long long>(src.value("accepted", std::uint64_t{0})));
  }
  // Each sample's analysis: what it dropped, by reason, and why it has no
  // sweeps when it has none.
  if (s.contains("samples") && s.at("samples").is_array()) {
    for (const auto& sample : s.at("samples")) {
      const auto& f = sample.at("field");
      std::cout << "sample " << sample.value("sample", "") << ": " << sample.value("lockin_readings", std::uint64_t{0})
                << " lock-in readings, " << sample.value("aligned_points", std::uint64_t{0}) << " aligned, "
                << sample.value("sweeps", std::uint64_t{0}) << " sweeps; field every "
                << fixed(f.value("median_interval_s", 0.0), 3) << " s (age limit "
                << fixed(f.value("age_limit_s", 0.0), 1) << " s), reversal tolerance "
                << fmt::format("{:.3g}", f.value("reversal_tolerance_t", 0.0) * 1e3) << " mT, span/2 "
                << fmt::format("{:.3g}", f.value("half_span_t", 0.0) * 1e3) << " mT\n";
      for (const char* stage : {"aligner", "segmenter"}) {
        std::string line;
        for (const auto& [reason, n] : sample.at("dropped").at(stage).items()) {
          if (n.get<std::uint64_t>() > 0) line += " " + reason + "=" + std::to_string(n.get<std::uint64_t>());
        }
        if (!line.empty()) std::cout << "  dropped by the " << stage << ":" << line << "\n";
      }
      if (sample.contains("no_sweeps_reason") && sample.at("no_sweeps_reason").is_string()) {
        std::cout << "  no sweeps: " << sample.at("no_sweeps_reason").get<std::string>() << "\n";
      }
    }
  }
  // Parts of lphid whose thread failed: they stopped, the rest goes on.
  if (s.contains("failed_parts") && !s.at("failed_parts").empty()) {
    std::printf("\n%-24s %s\n", "failed part", "error");
    for (const auto& p : s.at("failed_parts")) {
      std::printf("%-24s %s\n", p.value("part", "").c_str(), p.value("error", "").c_str());
    }
  }
  if (!s.contains("drivers") || s.at("drivers").empty()) return;
  // The instrument drivers lphid runs itself: is each instrument talking, and
  // if not, what went wrong.
  std::printf("\n%-20s %-11s %-22s %-10s %10s %10s %10s %8s %8s\n", "driver", "type", "address", "state",
              "reading s", "readings", "buffered", "faults", "reconn");
  for (const auto& d : s.at("drivers")) {
    std::uint64_t faults = 0;
    for (const auto& [name, n] : d.at("faults").items()) {
      if (name != "reconnects") faults += n.get<std::uint64_t>();
    }
    std::printf("%-20s %-11s %-22s %-10s %10s %10llu %10llu %8llu %8llu\n", d.value("source", "").c_str(),
                d.value("driver", "").c_str(), d.value("address", "").c_str(), d.value("state", "").c_str(),
                value_or_dash(d.at("last_reading_age_s"), 1).c_str(),
                static_cast<unsigned long long>(d.value("readings", std::uint64_t{0})),
                static_cast<unsigned long long>(d.value("buffered", std::uint64_t{0})),
                static_cast<unsigned long long>(faults),
                static_cast<unsigned long long>(d.at("faults").value("reconnects", std::uint64_t{0})));
    if (!d.value("identity", "").empty()) std::printf("    identity: %s\n", d.value("identity", "").c_str());
    if (!d.value("last_error", "").empty() && d.value("state", "") != "connected") {
      std::printf("    last error: %s\n", d.value("last_error", "").c_str());
    }
  }
}

}  // namespace

void register_status_command(CLI::App& app, int* exit_code) {
  auto* cmd = app.add_subcommand("status", "show lphid's uptime, sources, counters and writer lag");
  struct Options {
    std::string data_dir;
    bool json = false;
    double timeout_s = 5.0;
  };
  auto opt = std::make_shared<Options>();
  add_data_dir_option(*cmd, opt->data_dir);
  cmd->add_flag("--json", opt->json, "print lphid's status as JSON");
  cmd->add_option("--timeout", opt->timeout_s, "seconds to wait for lphid")->check(CLI::PositiveNumber);
  cmd->callback([opt, exit_code] {
    auto dir = locate_data_dir(opt->data_dir);
    if (!dir) {
      *exit_code = exit_bad_input;
      return;
    }
    const auto endpoints = config::client_endpoints(*dir);
    zmq::context_t context(1);
    zmq::socket_t socket(context, zmq::socket_type::dealer);
    socket.set(zmq::sockopt::linger, 0);
    socket.connect(endpoints.control);
    socket.send(zmq::str_buffer(R"({"type":"status"})"), zmq::send_flags::none);
    zmq::pollitem_t item{socket.handle(), 0, ZMQ_POLLIN, 0};
    zmq::poll(&item, 1, std::chrono::milliseconds(static_cast<long>(opt->timeout_s * 1000)));
    zmq::message_t reply;
    if (!(item.revents & ZMQ_POLLIN) || !socket.recv(reply, zmq::recv_flags::dontwait)) {
      std::cerr << "lphi: lphid does not answer on " << endpoints.control << "\n";
      *exit_code = exit_unreachable;
      return;
    }
    auto status = json::parse(reply.to_string_view(), nullptr, false);
    if (!status.is_object() || status.value("type", "") != "status") {
      std::cerr << "lphi: lphid sent an unexpected reply\n";
      *exit_code = exit_failure;
      return;
    }
    if (opt->json) {
      std::cout << status.dump(2) << "\n";
    } else {
      try {
        print_human(status);
      } catch (const json::exception& e) {
        std::cerr << "lphi: lphid's status is incomplete: " << e.what() << "\n";
        *exit_code = exit_failure;
        return;
      }
    }
    *exit_code = exit_ok;
  });
}

}  // namespace lphi::client
