// lphi send: readings from standard input (JSON lines or CSV) to lphid,
// through the sender library. Waits (retrying, reconnecting) while lphid is
// down or restarting, and exits 0 only when every reading was acknowledged.
// --column maps a key or CSV column of the input, in a stated unit, to the
// protocol's key (column_map.hpp, e.g. field_t=B:mT); a reading beyond the
// limits (schema/protocol/limits.hpp) is refused here, with its line, the
// unit it was likely in and the mapping that would read it so.
#include <chrono>
#include <iostream>
#include <memory>
#include <nlohmann/json.hpp>
#include <sstream>
#include <string>

#include "daemon/client/column_map.hpp"
#include "schema/protocol/limits.hpp"
#include "schema/text/csv_reader.hpp"
#include "schema/text/text.hpp"
#include "daemon/client/daemon_locate.hpp"
#include "daemon/client/exit_codes.hpp"
#include "schema/protocol/codec.hpp"
#include "drivers/sender/sender.hpp"

namespace lphi::client {

namespace {

using nlohmann::json;
using Clock = std::chrono::steady_clock;

struct SendOptions {
  std::string data_dir, source, format = "jsonl", encoding = "msgpack";
  double timeout_s = 0.0;  // 0: no limit
  std::size_t batch = 2000;
  std::vector<std::string> columns;
};

// The keys of a reading (daemon/PROTOCOL.md), which --column may map.
const std::vector<std::string>& reading_keys() {
  static const std::vector<std::string> keys = {
      "seq",     "t",        "x_v",           "y_v",          "frequency_hz", "range_v",
      "time_constant_s", "overload", "temperature_k", "resistance_ohm", "field_t"};
  return keys;
}

class Feeder {
 public:
  Feeder(drivers::Sender& sender, protocol::SourceKind kind, std::int64_t next_seq,
         const ColumnMap& map)
      : sender_(sender), kind_(kind), next_seq_(next_seq), map_(map) {}

  // Checks one reading (as a JSON object) like lphid would and spools it.
  void feed(json reading, const std::string& where) {
    if (reading.is_object()) {
      if (auto problem = apply_map(reading); !problem.empty()) {
        std::cerr << where << ": " << problem << "\n";
        ++local_rejections;
        return;
      }
      if (!reading.contains("seq")) reading["seq"] = next_seq_;
    }
    json one = json::array({std::move(reading)});
    protocol::Readings accepted = protocol::empty_readings(kind_);
    std::vector<protocol::RejectedReading> rejected;
    protocol::read_readings(one, kind_, accepted, rejected);
    if (!rejected.empty()) {
      std::cerr << where << ": " << protocol::reason_name(rejected[0].reason) << ": "
                << rejected[0].detail << mapping_hint(one[0], rejected[0].reason) << "\n";
      ++local_rejections;
      return;
    }
    std::visit(
        [&](const auto& v) {
          const auto& r = v.front();
          if (r.seq >= next_seq_) next_seq_ = r.seq + 1;
          while (!sender_.offer(r)) sender_.pump(std::chrono::milliseconds(20));
        },
        accepted);
  }
  std::uint64_t local_rejections = 0;

 private:
  // Renames the mapped keys to the protocol's and converts their values to
  // SI; a message when the reading holds a key under both names.
  std::string apply_map(json& reading) const {
    for (const auto& key : reading_keys()) {
      const std::string name = map_.file_name(key);
      const auto it = reading.find(name);
      if (it == reading.end()) continue;
      json value = *it;
      if (name != key) {
        if (reading.contains(key)) {
          return "the reading has both '" + name + "' (mapped to " + key + " by --column) and '" +
                 key + "'";
        }
        reading.erase(name);
      }
      if (value.is_number() && map_.to_si(key) != 1.0) value = value.get<double>() * map_.to_si(key);
      reading[key] = std::move(value);
    }
    return {};
  }

  // For a value beyond a limit: how to map the input's key in the unit it
  // was likely written in ("; map it with --column field_t=B:mT").
  std::string mapping_hint(const json& reading, protocol::Reason reason) const {
    std::string key;
    std::optional<protocol::limits::LimitRefusal> r;
    if (reason == protocol::Reason::field_out_of_range && reading.contains("field_t")) {
      key = "field_t";
      r = protocol::limits::field_refusal(reading["field_t"].get<double>());
    } else if (reason == protocol::Reason::temperature_out_of_range &&
               reading.contains("temperature_k")) {
      key = "temperature_k";
      r = protocol::limits::temperature_refusal(reading["temperature_k"].get<double>());
    }
    if (!r || r->likely_unit.empty()) return {};
    if (!map_.unit(key).empty()) {
      return " (read in " + map_.unit(key) + " as --column " + key + " says)";
    }
    return "; map it with --column " + key + "=" + map_.file_name(key) + ":" +
           std::string(r->likely_unit);
  }

  drivers::Sender& sender_;
  protocol::SourceKind kind_;
  std::int64_t next_seq_;
  const ColumnMap& map_;
};

bool feed_jsonl(Feeder& feeder, std::istream& in) {
  std::string line;
  std::size_t number = 0;
  while (std::getline(in, line)) {
    ++number;
    if (line.find_first_not_of(" \t\r") == std::string::npos) continue;
    json reading = json::parse(line, nullptr, false);
    const std::string where = "stdin line " + std::to_string(number);
    if (reading.is_discarded()) {
      std::cerr << where << ": bad_encoding: not valid JSON\n";
      ++feeder.local_rejections;
      continue;
    }
    feeder.feed(std::move(reading), where);
  }
  return true;
}

// Streams the rows: a long pipe of readings is sent as it comes, in bounded memory.
bool feed_csv(Feeder& feeder, std::istream& in, const ColumnMap& map) {
  text::CsvReader reader(in, "stdin");
  std::vector<std::string> header;
  if (auto s = reader.read_header(header); !s.ok()) {
    std::cerr << s.message() << "\n";
    return false;
  }
  std::vector<std::string> cells;
  Status status;
  while (reader.next(cells, status)) {
    if (cells.size() != header.size()) {
      std::cerr << reader.at_line(reader.line()) << ": row has " << cells.size()
                << (cells.size() == 1 ? " cell" : " cells") << ", the header has " << header.size()
                << " columns" << text::CsvReader::delimiter_note(cells) << "\n";
      return false;
    }
    json reading = json::object();
    for (std::size_t col = 0; col < header.size(); ++col) {
      const std::string& name = header[col];
      const std::string& cell = cells[col];
      if (cell.empty()) continue;  // an optional value left out
      if (name == map.file_name("overload")) {
        if (cell == "true" || cell == "1") {
          reading[name] = true;
        } else if (cell == "false" || cell == "0") {
          reading[name] = false;
        } else {
          reading[name] = cell;  // refused below as wrong_type
        }
        continue;
      }
      auto v = text::parse_number(cell);
      if (!v) {
        reading[name] = cell;
      } else if (name == map.file_name("seq")) {
        reading[name] = static_cast<std::int64_t>(*v);
        if (static_cast<double>(static_cast<std::int64_t>(*v)) != *v) reading[name] = *v;
      } else {
        reading[name] = *v;
      }
    }
    feeder.feed(std::move(reading), reader.at_line(reader.line()));
  }
  if (!status.ok()) {
    std::cerr << status.message() << "\n";
    return false;
  }
  return true;
}

}  // namespace

void register_send_command(CLI::App& app, int* exit_code) {
  auto* cmd = app.add_subcommand("send", "send readings from standard input to lphid");
  auto opt = std::make_shared<SendOptions>();
  add_data_dir_option(*cmd, opt->data_dir);
  cmd->add_option("--source", opt->source, "the configured source the readings come from")->required();
  cmd->add_option("--format", opt->format, "jsonl (one JSON object per line) or csv")
      ->check(CLI::IsMember({"jsonl", "csv"}));
  cmd->add_option("--encoding", opt->encoding, "wire encoding: msgpack or json")
      ->check(CLI::IsMember({"msgpack", "json"}));
  cmd->add_option("--timeout", opt->timeout_s, "give up after this many seconds (0: keep trying)")
      ->check(CLI::NonNegativeNumber);
  cmd->add_option("--batch", opt->batch, "readings per batch")->check(CLI::Range(1, 100000));
  cmd->add_option("--column", opt->columns,
                  "map a key (jsonl) or column (csv) of the input to a reading's key, in a "
                  "stated unit: KEY=NAME, KEY=NAME:UNIT or KEY:UNIT, e.g. field_t=B:mT "
                  "(repeatable; keys: seq, t, x_v, y_v, frequency_hz, range_v, time_constant_s, "
                  "overload, temperature_k, resistance_ohm, field_t; units as for lphi fit "
                  "--column)");
  cmd->callback([opt, exit_code] {
    ColumnMap map;
    for (const auto& m : opt->columns) {
      if (auto s = map.add(m, reading_keys(), "a reading"); !s.ok()) {
        std::cerr << "lphi send: " << s.message() << "\n";
        *exit_code = exit_bad_input;
        return;
      }
    }
    auto dir = locate_data_dir(opt->data_dir);
    if (!dir) {
      *exit_code = exit_bad_input;
      return;
    }
    const auto endpoints = config::client_endpoints(*dir);
    const auto limit = opt->timeout_s > 0 ? std::chrono::milliseconds(static_cast<long>(opt->timeout_s * 1000))
                                          : std::chrono::milliseconds(std::chrono::hours(24 * 365));
    const auto deadline = Clock::now() + limit;
    zmq::context_t context(1);
    drivers::SenderOptions so;
    so.endpoint = endpoints.ingest;
    so.source = opt->source;
    so.encoding = *protocol::parse_encoding(opt->encoding);
    so.batch_max_readings = opt->batch;
    std::optional<protocol::Refusal> refusal;
    std::optional<protocol::HelloReply> hello;
    {
      drivers::Sender probe(context, so);
      hello = probe.hello(limit, &refusal);
    }
    if (!hello) {
      if (refusal) {
        std::cerr << "lphi: lphid refuses source \"" << opt->source << "\": "
                  << protocol::reason_name(refusal->reason) << " (" << refusal->detail << ")\n";
        *exit_code = exit_bad_input;
      } else {
        std::cerr << "lphi: lphid does not answer on " << endpoints.ingest << "\n";
        *exit_code = exit_unreachable;
      }
      return;
    }
    so.kind = hello->kind;
    drivers::Sender sender(context, so);
    Feeder feeder(sender, hello->kind, hello->next_seq, map);
    const bool read_ok =
        opt->format == "csv" ? feed_csv(feeder, std::cin, map) : feed_jsonl(feeder, std::cin);
    const auto left = deadline - Clock::now();
    const bool done =
        sender.flush(std::max(std::chrono::duration_cast<std::chrono::milliseconds>(left),
                              std::chrono::milliseconds(0)));
    const auto& t = sender.totals();
    for (const auto& r : t.first_rejections) {
      std::cerr << "rejected";
      if (r.seq) std::cerr << " seq " << *r.seq;
      std::cerr << ": " << protocol::reason_name(r.reason) << ": " << r.detail << "\n";
    }
    const std::uint64_t rejected = t.rejected + feeder.local_rejections;
    std::cout << "accepted " << t.accepted << ", duplicates " << t.duplicates << ", rejected "
              << rejected;
    if (!done) std::cout << ", unacknowledged " << sender.unacknowledged();
    std::cout << "\n";
    if (!read_ok) {
      *exit_code = exit_bad_input;
    } else if (!done) {
      std::cerr << "lphi: gave up waiting for lphid's acknowledgements\n";
      *exit_code = exit_unreachable;
    } else {
      *exit_code = rejected > 0 ? exit_failure : exit_ok;
    }
  });
}

}  // namespace lphi::client
