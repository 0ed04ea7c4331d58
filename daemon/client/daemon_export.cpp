// lphi export readings: stored readings of one source, as CSV or JSON lines,
// read through a read-only connection to the data directory's database (the
// daemon need not run).
#include <charconv>
#include <filesystem>
#include <iostream>
#include <memory>

#include "daemon/client/daemon_locate.hpp"
#include "daemon/client/exit_codes.hpp"
#include "schema/protocol/codec.hpp"
#include "daemon/store/reader.hpp"

namespace lphi::client {

namespace {

// Shortest text that reads back as the same double.
void put(std::string& line, double v) {
  char buf[32];
  auto r = std::to_chars(buf, buf + sizeof buf, v);
  line.append(buf, r.ptr);
}

template <class T>
void put_optional(std::string& line, const std::optional<T>& v) {
  line += ',';
  if (!v) return;
  if constexpr (std::is_same_v<T, bool>) {
    line += *v ? "true" : "false";
  } else {
    put(line, *v);
  }
}

std::string_view csv_header(protocol::SourceKind kind) {
  switch (kind) {
    case protocol::SourceKind::lockin: return "seq,t,x_v,y_v,frequency_hz,range_v,time_constant_s,overload";
    case protocol::SourceKind::thermometer: return "seq,t,temperature_k,resistance_ohm";
    case protocol::SourceKind::field: return "seq,t,field_t";
  }
  return "";
}

void csv_row(std::string& line, const protocol::LockinReading& r) {
  line += std::to_string(r.seq) + ',';
  put(line, r.t);
  line += ',';
  put(line, r.x_v);
  line += ',';
  put(line, r.y_v);
  put_optional(line, r.frequency_hz);
  put_optional(line, r.range_v);
  put_optional(line, r.time_constant_s);
  put_optional(line, r.overload);
}
void csv_row(std::string& line, const protocol::ThermometerReading& r) {
  line += std::to_string(r.seq) + ',';
  put(line, r.t);
  line += ',';
  put(line, r.temperature_k);
  put_optional(line, r.resistance_ohm);
}
void csv_row(std::string& line, const protocol::FieldReading& r) {
  line += std::to_string(r.seq) + ',';
  put(line, r.t);
  line += ',';
  put(line, r.field_t);
}

}  // namespace

void register_export_command(CLI::App& app, int* exit_code) {
  auto* exp = app.add_subcommand("export", "write stored data");
  exp->require_subcommand(1);
  auto* cmd = exp->add_subcommand("readings", "write one source's stored readings (with seq)");
  struct Options {
    std::string data_dir, source, format = "csv";
    std::optional<double> from, to;
  };
  auto opt = std::make_shared<Options>();
  add_data_dir_option(*cmd, opt->data_dir);
  cmd->add_option("--source", opt->source, "the source's name")->required();
  cmd->add_option("--from", opt->from, "earliest t (s since the Unix epoch)");
  cmd->add_option("--to", opt->to, "latest t (s since the Unix epoch)");
  cmd->add_option("--format", opt->format, "csv or jsonl")->check(CLI::IsMember({"csv", "jsonl"}));
  cmd->callback([opt, exit_code] {
    auto dir = locate_data_dir(opt->data_dir);
    if (!dir) {
      *exit_code = exit_bad_input;
      return;
    }
    const std::string path = store::database_path(*dir);
    if (!std::filesystem::exists(path)) {
      std::cerr << "lphi: no database in " << *dir << " (has lphid run there?)\n";
      *exit_code = exit_no_data;
      return;
    }
    store::StoreReader reader;
    if (auto s = store::StoreReader::open(path, reader); !s) {
      std::cerr << "lphi: " << s.message() << "\n";
      *exit_code = exit_failure;
      return;
    }
    store::SourceRow source;
    bool found = false;
    if (auto s = reader.find_source(opt->source, source, found); !s) {
      std::cerr << "lphi: " << s.message() << "\n";
      *exit_code = exit_failure;
      return;
    }
    if (!found) {
      std::cerr << "lphi: no source \"" << opt->source << "\" in " << path << "\n";
      *exit_code = exit_no_data;
      return;
    }
    const bool csv = opt->format == "csv";
    if (csv) std::cout << csv_header(source.kind) << "\n";
    std::string out;
    auto status = reader.readings(
        source, opt->from.value_or(store::all_time_from), opt->to.value_or(store::all_time_to),
        [&](const protocol::Readings& chunk) {
          out.clear();
          std::visit(
              [&](const auto& rows) {
                for (const auto& r : rows) {
                  if (csv) {
                    csv_row(out, r);
                  } else {
                    out += protocol::reading_to_json(r).dump();
                  }
                  out += '\n';
                }
              },
              chunk);
          std::cout << out;
          return static_cast<bool>(std::cout);
        });
    std::cout.flush();
    if (!status) {
      std::cerr << "lphi: " << status.message() << "\n";
      *exit_code = exit_failure;
      return;
    }
    *exit_code = exit_ok;
  });
}

}  // namespace lphi::client
