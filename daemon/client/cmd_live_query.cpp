// lphi sweeps | fits | verdict | alerts | ack: one control request each, the
// reply's array printed as a table or, with --json, as it came.
#include <iostream>
#include <memory>
#include <nlohmann/json.hpp>
#include <optional>
#include <set>
#include <string>

#include "daemon/client/control_request.hpp"
#include "daemon/client/daemon_locate.hpp"
#include "daemon/client/exit_codes.hpp"
#include "daemon/client/live_commands.hpp"
#include "daemon/client/live_format.hpp"

namespace lphi::client {

namespace {

using nlohmann::json;

struct QueryOptions {
  std::string data_dir;
  std::string sample;
  bool json = false;
  bool all = false;
  double timeout_s = 5.0;
  long long id = 0;
};

void add_common_options(CLI::App& cmd, QueryOptions& opt, bool with_sample) {
  add_data_dir_option(cmd, opt.data_dir);
  if (with_sample) cmd.add_option("--sample", opt.sample, "only this sample (default: every sample)");
  cmd.add_flag("--json", opt.json, "print lphid's answer as JSON");
  cmd.add_option("--timeout-s", opt.timeout_s, "seconds to wait for lphid")->check(CLI::PositiveNumber);
}

// Asks, and leaves the reply in `reply`; returns the exit code when it failed.
std::optional<int> ask(const QueryOptions& opt, const json& request, json& reply) {
  auto dir = locate_data_dir(opt.data_dir);
  if (!dir) return exit_bad_input;
  const auto endpoints = config::client_endpoints(*dir);
  const auto answer = ask_control(endpoints.control, request, timeout_ms(opt.timeout_s));
  if (answer.outcome != ControlReply::Outcome::ok) {
    return report_failed_reply(answer, request.value("type", ""), endpoints.control);
  }
  reply = answer.body;
  return std::nullopt;
}

json list_request(const std::string& type, const QueryOptions& opt) {
  json request = {{"type", type}};
  if (!opt.sample.empty()) request["sample"] = opt.sample;
  return request;
}

// The array `key` of the reply, or nothing (after saying so) when missing.
const json* reply_array(const json& reply, const std::string& key) {
  const auto it = reply.find(key);
  if (it == reply.end() || !it->is_array()) {
    std::cerr << "lphi: lphid's reply has no \"" << key << "\" array\n";
    return nullptr;
  }
  return &*it;
}

using Printer = void (*)(const json&, std::ostream&);

// sweeps, fits, verdict, alerts: the same steps, another key and table.
void run_list(const QueryOptions& opt, json request, const std::string& key, Printer print,
              bool empty_is_no_data, const std::string& empty_text, int* exit_code) {
  json reply;
  if (auto failed = ask(opt, request, reply)) {
    *exit_code = *failed;
    return;
  }
  const json* items = reply_array(reply, key);
  if (items == nullptr) {
    *exit_code = exit_failure;
    return;
  }
  if (opt.json) {
    std::cout << items->dump(2) << '\n';
  } else if (items->empty()) {
    std::cout << empty_text << '\n';
  } else {
    print(*items, std::cout);
  }
  *exit_code = items->empty() && empty_is_no_data ? exit_no_data : exit_ok;
}

std::string scope(const QueryOptions& opt) {
  return opt.sample.empty() ? std::string() : " for sample \"" + opt.sample + "\"";
}

// lphi alerts: with --sample, the alerts about the sample and about its
// three sources (an alert's "subject" is a sample's or a source's name).
int run_alerts(const QueryOptions& opt) {
  std::set<std::string> subjects;
  if (!opt.sample.empty()) {
    json samples;
    if (auto failed = ask(opt, {{"type", "samples"}}, samples)) return *failed;
    for (const auto& s : samples.value("samples", json::array())) {
      if (!s.is_object() || s.value("name", "") != opt.sample) continue;
      subjects.insert(opt.sample);
      for (const char* source : {"lockin", "thermometer", "field"}) subjects.insert(s.value(source, ""));
    }
    if (subjects.empty()) {
      std::cerr << "lphi: lphid has no sample named \"" << opt.sample << "\"\n";
      return exit_no_data;
    }
  }
  json reply;
  if (auto failed = ask(opt, {{"type", "alerts"}, {"all", opt.all}}, reply)) return *failed;
  const json* items = reply_array(reply, "alerts");
  if (items == nullptr) return exit_failure;
  json alerts = json::array();
  for (const auto& a : *items) {
    if (subjects.empty() || (a.is_object() && subjects.count(a.value("subject", "")) != 0)) alerts.push_back(a);
  }
  if (opt.json) {
    std::cout << alerts.dump(2) << '\n';
  } else if (alerts.empty()) {
    std::cout << (opt.all ? "no alerts" : "no live alerts") << scope(opt) << '\n';
  } else {
    print_alerts_table(alerts, std::cout);
  }
  return exit_ok;
}

}  // namespace

void register_query_commands(CLI::App& app, int* exit_code) {
  {
    auto* cmd = app.add_subcommand("sweeps", "list the field sweeps lphid has found");
    auto opt = std::make_shared<QueryOptions>();
    add_common_options(*cmd, *opt, true);
    cmd->callback([opt, exit_code] {
      run_list(*opt, list_request("sweeps", *opt), "sweeps", print_sweeps_table, true,
               "no sweeps yet" + scope(*opt), exit_code);
    });
  }
  {
    auto* cmd = app.add_subcommand("fits", "list the fit of every sweep (L_phi, alpha, chi2)");
    auto opt = std::make_shared<QueryOptions>();
    add_common_options(*cmd, *opt, true);
    cmd->callback([opt, exit_code] {
      run_list(*opt, list_request("fits", *opt), "fits", print_fits_table, true, "no fits yet" + scope(*opt),
               exit_code);
    });
  }
  {
    auto* cmd = app.add_subcommand("verdict", "show the L_phi(T) fit and the saturation verdict of each sample");
    auto opt = std::make_shared<QueryOptions>();
    add_common_options(*cmd, *opt, true);
    cmd->callback([opt, exit_code] {
      run_list(*opt, list_request("verdict", *opt), "verdicts", print_verdicts, true, "no samples configured",
               exit_code);
    });
  }
  {
    auto* cmd = app.add_subcommand("alerts", "list the alerts not yet cleared (--all: every alert)");
    auto opt = std::make_shared<QueryOptions>();
    add_common_options(*cmd, *opt, true);
    cmd->add_flag("--all", opt->all, "include cleared alerts");
    cmd->callback([opt, exit_code] { *exit_code = run_alerts(*opt); });
  }
  {
    auto* cmd = app.add_subcommand("ack", "acknowledge an alert (its id as `lphi alerts` shows it)");
    auto opt = std::make_shared<QueryOptions>();
    add_common_options(*cmd, *opt, false);
    cmd->add_option("ID", opt->id, "the alert's id")->required()->check(CLI::PositiveNumber);
    cmd->callback([opt, exit_code] {
      json reply;
      if (auto failed = ask(*opt, {{"type", "ack"}, {"id", opt->id}}, reply)) {
        *exit_code = *failed;
        return;
      }
      if (opt->json) {
        std::cout << reply.dump(2) << '\n';
      } else {
        std::cout << "alert " << opt->id << ": " << reply.value("state", std::string("acknowledged")) << '\n';
      }
      *exit_code = exit_ok;
    });
  }
}

void register_live_commands(CLI::App& app, int* exit_code) {
  register_query_commands(app, exit_code);
  register_watch_command(app, exit_code);
  register_replay_command(app, exit_code);
}

}  // namespace lphi::client
