// lphi replay FILE.csv --sample NAME: streams a recorded cooldown
// (recording_csv.hpp) into lphid as the sample's three sources, with the
// sender library (acknowledged after commit, resent when lost), then waits
// until lphid's analysis has consumed all of it.
//
// Steps, one function each (run_replay strings them together): check the
// options (check_options) and the whole file (scan_file); ask lphid for the
// sample's sources ({"type":"samples"}) and hello each source for its next
// seq (connect_streams); send every row as one thermometer, one field and one
// lock-in reading (the cells present), paced at --speed times real time or,
// with --fast, as fast as lphid acknowledges (send_rows); wait for every
// acknowledgement (wait_for_acks) and report them (report_sent); poll
// {"type":"progress"} until the analysis is idle and has analysed the last
// seq sent of each source (wait_for_analysis). SIGINT stops the sending,
// waits for the acknowledgements of what was sent and reports.
//
// Exit codes (exit_codes.hpp): 0 when the sample has sweeps once analysed;
// exit_no_sweeps (5) when it has none, with lphid's reason on stderr
// ("no sweeps for S: largest field excursion 20 mT, below the span
// needed ..."); exit_failure when lphid rejected readings.
//
// Relative times are shifted to Unix times by --start-unix T (t_unix = T +
// time_s); by default T is chosen so that the recording ends now, since
// lphid refuses readings too far in its future.
#include <algorithm>
#include <array>
#include <chrono>
#include <cmath>
#include <fstream>
#include <iostream>
#include <memory>
#include <nlohmann/json.hpp>
#include <optional>
#include <string>
#include <thread>
#include <vector>

#include "daemon/client/control_request.hpp"
#include "daemon/client/daemon_locate.hpp"
#include "daemon/client/exit_codes.hpp"
#include "daemon/client/format.hpp"
#include "daemon/client/interrupt.hpp"
#include "daemon/client/live_commands.hpp"
#include "daemon/client/recording_csv.hpp"
#include "drivers/sender/sender.hpp"

namespace lphi::client {

namespace {

using nlohmann::json;
using Clock = std::chrono::steady_clock;
using namespace std::chrono_literals;

struct ReplayOptions {
  std::string path;
  std::string data_dir;
  std::string sample;
  std::optional<double> speed;
  bool fast = false;
  std::optional<double> start_unix;
  std::vector<std::string> columns;
  double connect_timeout_s = 10.0;
  double stall_s = 60.0;  // give up when nothing moves for this long
};

enum Stream : std::size_t { lockin, thermometer, field };
constexpr std::array<const char*, 3> stream_key = {"lockin", "thermometer", "field"};
constexpr std::array<protocol::SourceKind, 3> stream_kind = {
    protocol::SourceKind::lockin, protocol::SourceKind::thermometer, protocol::SourceKind::field};

double unix_now() {
  return std::chrono::duration<double>(std::chrono::system_clock::now().time_since_epoch()).count();
}

struct Streams {
  std::array<std::string, 3> source;
  std::array<std::unique_ptr<drivers::Sender>, 3> sender;
  std::array<std::int64_t, 3> next_seq{0, 0, 0};
  std::array<std::uint64_t, 3> offered{0, 0, 0};
  std::array<std::optional<std::int64_t>, 3> durable_through;  // highest seq stored, from the acks

  void pump_all(std::chrono::milliseconds wait) {
    for (auto& s : sender) s->pump(wait / 3);
  }
  std::size_t unacknowledged() const {
    std::size_t n = 0;
    for (const auto& s : sender) n += s->unacknowledged();
    return n;
  }
  std::uint64_t settled() const {  // readings lphid has answered for
    std::uint64_t n = 0;
    for (const auto& s : sender) n += s->totals().accepted + s->totals().duplicates + s->totals().rejected;
    return n;
  }
  template <class R>
  void offer(Stream k, R reading) {
    reading.seq = next_seq[k]++;
    while (!sender[k]->offer(reading)) pump_all(5ms);
    ++offered[k];
  }
};

// Pumps until every offered reading is acknowledged; false (after saying
// so) when lphid answers nothing for opt.stall_s.
bool wait_for_acks(Streams& streams, const ReplayOptions& opt) {
  auto last_change = Clock::now();
  std::uint64_t settled = streams.settled();
  while (streams.unacknowledged() > 0) {
    streams.pump_all(30ms);
    if (streams.settled() != settled) {
      settled = streams.settled();
      last_change = Clock::now();
    } else if (Clock::now() - last_change > timeout_ms(opt.stall_s)) {
      std::cerr << "lphi: lphid acknowledged nothing for " << format_number(opt.stall_s, 4) << " s; "
                << streams.unacknowledged() << " readings are unacknowledged\n";
      return false;
    }
  }
  return true;
}

// Polls progress until the analysis is idle and has reached every source's
// last durable seq. Returns the exit code and leaves the last reply in `last`.
int wait_for_analysis(const std::string& endpoint, const ReplayOptions& opt, const Streams& streams,
                      json& last) {
  auto last_change = Clock::now();
  std::string last_state;
  for (;;) {
    if (interrupted()) {
      std::cerr << "lphi: interrupted while lphid was analysing; the readings are stored\n";
      return exit_failure;
    }
    const auto reply = ask_control(endpoint, {{"type", "progress"}, {"sample", opt.sample}}, 5000ms);
    if (reply.outcome == ControlReply::Outcome::ok) {
      last = reply.body;
      if (last.contains("error") && last["error"].is_string()) {
        std::cerr << "lphi: lphid's analysis of " << opt.sample << " stopped: " << last["error"].get<std::string>()
                  << "\n";
        return exit_failure;
      }
      bool reached = last.value("idle", false);
      for (std::size_t k = 0; k < 3 && reached; ++k) {
        if (!streams.durable_through[k]) continue;
        for (const auto& s : last.value("sources", json::array())) {
          if (s.value("name", "") != streams.source[k]) continue;
          const auto& analysed = s["analysed_seq"];
          if (!analysed.is_number_integer() || analysed.get<std::int64_t>() < *streams.durable_through[k]) {
            reached = false;
          }
        }
      }
      if (reached) return exit_ok;
      const std::string state = json{last.value("sources", json::array()), last.value("sweeps", 0),
                                     last.value("fits", 0)}
                                    .dump();
      if (state != last_state) {
        last_state = state;
        last_change = Clock::now();
      }
    } else if (reply.outcome != ControlReply::Outcome::unreachable) {
      return report_failed_reply(reply, "progress", endpoint);
    }
    if (Clock::now() - last_change > timeout_ms(opt.stall_s)) {
      if (reply.outcome == ControlReply::Outcome::unreachable) {
        std::cerr << "lphi: lphid stopped answering on " << endpoint << " while analysing\n";
        return exit_unreachable;
      }
      std::cerr << "lphi: lphid's analysis of " << opt.sample << " made no progress for "
                << format_number(opt.stall_s, 4) << " s";
      if (last.contains("waiting_for") && last["waiting_for"].is_string()) {
        std::cerr << " (it waits for newer readings of " << last["waiting_for"].get<std::string>() << ")";
      }
      std::cerr << "\n";
      return exit_failure;
    }
    std::this_thread::sleep_for(100ms);
  }
}

// Step 0: the options that do not need the file. exit_ok to go on.
int check_options(const ReplayOptions& opt, ColumnMap& map) {
  if (opt.speed && opt.fast) {
    std::cerr << "lphi: give --speed X or --fast, not both\n";
    return exit_bad_input;
  }
  if (opt.speed && !(std::isfinite(*opt.speed) && *opt.speed > 0.0)) {
    std::cerr << "lphi: --speed must be a positive number\n";
    return exit_bad_input;
  }
  for (const auto& m : opt.columns) {
    if (auto s = add_column_mapping(m, map); !s.ok()) {
      std::cerr << "lphi: " << s.message() << "\n";
      return exit_bad_input;
    }
  }
  return exit_ok;
}

// Step 1: the whole file first, so that nothing is sent from a file with a
// bad row; and the shift that makes its times Unix times.
int scan_file(const ReplayOptions& opt, const ColumnMap& map, RecordingSummary& summary, double& shift) {
  {
    std::ifstream in(opt.path, std::ios::binary);
    if (!in) {
      std::cerr << "lphi: cannot open " << opt.path << "\n";
      return exit_bad_input;
    }
    if (auto s = scan_recording(in, opt.path, map, summary); !s.ok()) {
      std::cerr << "lphi: " << s.message() << "\n";
      return exit_bad_input;
    }
  }
  shift = 0.0;
  if (!summary.unix_times) {
    shift = opt.start_unix ? *opt.start_unix : unix_now() - summary.last_t_s;
  } else if (opt.start_unix) {
    std::cerr << "lphi: --start-unix is for relative times; " << opt.path << " holds Unix times\n";
    return exit_bad_input;
  }
  if (!(summary.first_t_s + shift > 0.0)) {
    std::cerr << "lphi: the first row's time would be " << format_number(summary.first_t_s + shift, 12)
              << " s Unix; give a later --start-unix\n";
    return exit_bad_input;
  }
  return exit_ok;
}

// Step 2: the sample's sources from lphid, and a sender per source that
// knows its next seq.
int connect_streams(const ReplayOptions& opt, const config::Endpoints& endpoints,
                    zmq::context_t& context, Streams& streams) {
  const auto samples = ask_control(endpoints.control, {{"type", "samples"}}, timeout_ms(opt.connect_timeout_s));
  if (samples.outcome != ControlReply::Outcome::ok) {
    return report_failed_reply(samples, "samples", endpoints.control);
  }
  bool found = false;
  for (const auto& s : samples.body.value("samples", json::array())) {
    if (!s.is_object() || s.value("name", "") != opt.sample) continue;
    found = true;
    for (std::size_t k = 0; k < 3; ++k) streams.source[k] = s.value(stream_key[k], "");
  }
  if (!found) {
    std::cerr << "lphi: lphid has no sample named \"" << opt.sample << "\"\n";
    return exit_no_data;
  }
  for (std::size_t k = 0; k < 3; ++k) {
    drivers::SenderOptions so;
    so.endpoint = endpoints.ingest;
    so.source = streams.source[k];
    so.kind = stream_kind[k];
    streams.sender[k] = std::make_unique<drivers::Sender>(context, so);
    std::optional<protocol::Refusal> refusal;
    const auto hello = streams.sender[k]->hello(timeout_ms(opt.connect_timeout_s), &refusal);
    if (!hello) {
      if (refusal) {
        std::cerr << "lphi: lphid refuses source \"" << streams.source[k] << "\" of sample " << opt.sample << ": "
                  << protocol::reason_name(refusal->reason) << " (" << refusal->detail << ")\n";
        return exit_failure;
      }
      std::cerr << "lphi: lphid does not answer on " << endpoints.ingest << "\n";
      return exit_unreachable;
    }
    if (hello->kind != stream_kind[k]) {
      std::cerr << "lphi: source \"" << streams.source[k] << "\" is a " << protocol::kind_name(hello->kind)
                << ", not a " << stream_key[k] << "\n";
      return exit_failure;
    }
    streams.next_seq[k] = hello->next_seq;
    auto* durable = &streams.durable_through[k];
    streams.sender[k]->on_ack = [durable](const protocol::Readings&, const protocol::Ack& ack) {
      if (ack.durable_through && (!*durable || *ack.durable_through > **durable)) *durable = ack.durable_through;
    };
  }
  return exit_ok;
}

// Offers one row's readings (the cells present) at time t.
void offer_row(Streams& streams, const RecordingRow& row, double t) {
  if (row.temperature_k) streams.offer(thermometer, protocol::ThermometerReading{0, t, *row.temperature_k, {}});
  if (row.field_t) streams.offer(field, protocol::FieldReading{0, t, *row.field_t});
  if (row.has_lockin) {
    protocol::LockinReading r;
    r.t = t;
    r.x_v = row.x_v;
    r.y_v = row.y_v;
    r.range_v = row.range_v;
    r.time_constant_s = row.time_constant_s;
    r.overload = row.overload;
    streams.offer(lockin, r);
  }
}

struct SendOutcome {
  std::uint64_t rows = 0;
  bool stopped = false;  // by SIGINT
  Status status;         // a row that failed on the second reading
};

// Step 3: send, row by row, paced (or --fast); SIGINT stops it.
SendOutcome send_rows(const ReplayOptions& opt, const ColumnMap& map, const RecordingSummary& summary,
                      double shift, Streams& streams) {
  const double speed = opt.speed.value_or(1.0);
  install_interrupt_handler();
  std::ifstream in(opt.path, std::ios::binary);
  RecordingReader reader;
  SendOutcome out;
  out.status = in ? reader.open(in, opt.path, map) : Status::invalid_input("cannot open " + opt.path + " again");
  const auto wall_start = Clock::now();
  RecordingRow row;
  while (out.status.ok() && !interrupted() && reader.next(row, out.status)) {
    if (!opt.fast) {
      const auto due = wall_start + std::chrono::duration_cast<Clock::duration>(
                                        std::chrono::duration<double>((row.t_s - summary.first_t_s) / speed));
      while (!interrupted()) {
        const auto now = Clock::now();
        if (now >= due) break;
        streams.pump_all(std::min(std::chrono::duration_cast<std::chrono::milliseconds>(due - now) + 1ms, 30ms));
      }
      if (interrupted()) break;
    }
    offer_row(streams, row, row.t_s + shift);
    ++out.rows;
    if (out.rows % 512 == 0) streams.pump_all(0ms);
  }
  out.stopped = interrupted();
  return out;
}

// Step 4: what lphid answered, the first rejections of each source and the
// summary line. Returns the number of rejected readings.
std::uint64_t report_sent(const ReplayOptions& opt, const RecordingSummary& summary, const Streams& streams,
                          std::uint64_t rows) {
  std::uint64_t accepted = 0, duplicates = 0, rejected = 0;
  for (std::size_t k = 0; k < 3; ++k) {
    const auto& t = streams.sender[k]->totals();
    accepted += t.accepted;
    duplicates += t.duplicates;
    rejected += t.rejected;
    std::size_t shown = 0;
    for (const auto& r : t.first_rejections) {
      if (++shown > 5) break;
      std::cerr << "lphi: lphid rejected a reading of " << streams.source[k];
      if (r.seq) std::cerr << " (seq " << *r.seq << ")";
      std::cerr << ": " << protocol::reason_name(r.reason) << ": " << r.detail << "\n";
    }
  }
  std::cout << "replayed " << rows << " of " << summary.rows << " rows of " << opt.path << " as sample "
            << opt.sample << ": " << streams.offered[lockin] << " lock-in, " << streams.offered[thermometer]
            << " thermometer, " << streams.offered[field] << " field readings; accepted " << accepted
            << ", duplicates " << duplicates << ", rejected " << rejected << "\n";
  return rejected;
}

int run_replay(const ReplayOptions& opt) {
  ColumnMap map;
  if (const int code = check_options(opt, map); code != exit_ok) return code;
  RecordingSummary summary;
  double shift = 0.0;
  if (const int code = scan_file(opt, map, summary, shift); code != exit_ok) return code;

  auto dir = locate_data_dir(opt.data_dir);
  if (!dir) return exit_bad_input;
  const auto endpoints = config::client_endpoints(*dir);
  // The context outlives the senders' sockets (declared after it), or its
  // destruction would wait for them forever.
  zmq::context_t context(1);
  Streams streams;
  if (const int code = connect_streams(opt, endpoints, context, streams); code != exit_ok) return code;

  const SendOutcome sent = send_rows(opt, map, summary, shift, streams);
  if (!sent.status.ok()) {
    std::cerr << "lphi: " << sent.status.message() << " (the file changed while it was replayed?)\n";
  }
  if (sent.stopped) {
    std::cerr << "lphi: interrupted after " << sent.rows << " rows; waiting for lphid's acknowledgements\n";
  }
  const bool acked = wait_for_acks(streams, opt);
  const std::uint64_t rejected = report_sent(opt, summary, streams, sent.rows);
  if (!acked) return exit_unreachable;
  if (sent.stopped || !sent.status.ok()) return sent.status.ok() ? exit_failure : exit_bad_input;

  // Step 5: until the analysis has it all.
  json progress;
  const int code = wait_for_analysis(endpoints.control, opt, streams, progress);
  if (code != exit_ok) return code;
  std::cout << "lphid has analysed it: " << progress.value("sweeps", 0) << " sweeps and " << progress.value("fits", 0)
            << " fits stored for " << opt.sample << "\n";
  // No sweeps is not a success: say why, with lphid's own reason.
  if (progress.value("sweeps", 0) == 0) {
    const auto& why = progress.contains("no_sweeps_reason") ? progress["no_sweeps_reason"] : json();
    std::cerr << "lphi: no sweeps for " << opt.sample << ": "
              << (why.is_string() ? why.get<std::string>() : std::string("lphid gave no reason")) << "\n";
    return exit_no_sweeps;
  }
  return rejected > 0 ? exit_failure : exit_ok;
}

}  // namespace

void register_replay_command(CLI::App& app, int* exit_code) {
  auto* cmd = app.add_subcommand("replay", "stream a recorded cooldown (CSV) into lphid as one sample's readings");
  auto opt = std::make_shared<ReplayOptions>();
  cmd->add_option("FILE", opt->path,
                  "the recording: time_s, temperature_k, field_t, lockin_x_v, lockin_y_v"
                  " [, lockin_overload, lockin_range_v, lockin_time_constant_s]")
      ->required();
  add_data_dir_option(*cmd, opt->data_dir);
  cmd->add_option("--sample", opt->sample, "the configured sample whose sources the readings become")->required();
  cmd->add_option_function<double>(
      "--speed", [opt](const double& v) { opt->speed = v; }, "pace the rows at this many times real time (default 1)");
  cmd->add_flag("--fast", opt->fast, "send as fast as lphid acknowledges");
  cmd->add_option_function<double>(
      "--start-unix", [opt](const double& v) { opt->start_unix = v; },
      "Unix time of relative time 0 (default: the recording ends now)");
  cmd->add_option("--column", opt->columns, column_option_help(recording_columns()));
  cmd->add_option("--connect-timeout-s", opt->connect_timeout_s, "seconds to wait for lphid to answer")
      ->check(CLI::PositiveNumber);
  cmd->add_option("--stall-s", opt->stall_s, "give up when lphid acknowledges or analyses nothing for this long")
      ->check(CLI::PositiveNumber);
  cmd->callback([opt, exit_code] { *exit_code = run_replay(*opt); });
}

}  // namespace lphi::client
