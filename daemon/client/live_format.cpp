#include "daemon/client/live_format.hpp"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <ctime>

#include "daemon/client/format.hpp"

namespace lphi::client {

using nlohmann::json;

namespace {

const std::string dash = "-";

std::string text_at(const json& object, std::string_view key) {
  if (!object.is_object()) return dash;
  const auto it = object.find(key);
  if (it == object.end() || it->is_null()) return dash;
  if (it->is_string()) return it->get<std::string>();
  if (it->is_boolean()) return it->get<bool>() ? "yes" : "no";
  if (it->is_number_integer()) return std::to_string(it->get<long long>());
  if (it->is_number()) return format_number(it->get<double>(), 4);
  return it->dump();
}

bool flag_at(const json& object, std::string_view key) {
  if (!object.is_object()) return false;
  const auto it = object.find(key);
  return it != object.end() && it->is_boolean() && it->get<bool>();
}

std::string length_at(const json& object, std::string_view key, std::string_view err_key) {
  const auto v = number_at(object, key);
  if (!v) return dash;
  return format_length(*v, number_at(object, err_key));
}

std::string temperature_at(const json& object, std::string_view key, std::string_view err_key = {}) {
  const auto v = number_at(object, key);
  if (!v) return dash;
  return format_temperature(*v, err_key.empty() ? std::nullopt : number_at(object, err_key));
}

std::string time_at(const json& object, std::string_view key) {
  const auto v = number_at(object, key);
  return v ? format_utc(*v) : dash;
}

std::string value_with_error(const json& object, std::string_view key, std::string_view err_key) {
  const auto v = number_at(object, key);
  if (!v) return dash;
  return format_with_error(*v, number_at(object, err_key), "");
}

}  // namespace

std::string format_utc(double unix_s) {
  // Years 1..9999 keep the ISO-8601 form four digits wide.
  if (!std::isfinite(unix_s) || unix_s < -62135596800.0 || unix_s >= 253402300800.0) return dash;
  const auto whole = static_cast<std::time_t>(std::floor(unix_s));
  std::tm tm{};
  if (gmtime_r(&whole, &tm) == nullptr) return dash;
  char buffer[32];
  if (std::strftime(buffer, sizeof buffer, "%Y-%m-%dT%H:%M:%SZ", &tm) == 0) return dash;
  return buffer;
}

std::string format_temperature(double temperature_k, std::optional<double> error_k) {
  if (std::isfinite(temperature_k) && std::fabs(temperature_k) < 1.0) {
    return format_temperature_mk(temperature_k, error_k);
  }
  return format_with_error(temperature_k, error_k, "K");
}

std::optional<double> number_at(const json& object, std::string_view key) {
  if (!object.is_object()) return std::nullopt;
  const auto it = object.find(key);
  if (it == object.end() || !it->is_number()) return std::nullopt;
  const double v = it->get<double>();
  if (!std::isfinite(v)) return std::nullopt;
  return v;
}

namespace {

// A string member, or "" when absent or not a string.
std::string string_at(const json& object, std::string_view key) {
  if (!object.is_object()) return {};
  const auto it = object.find(key);
  return it != object.end() && it->is_string() ? it->get<std::string>() : std::string();
}

// The field offset the sweep was centred on, in mT with its error ("-"
// when the sweep could not be centred).
std::string field_offset_at(const json& object) {
  const auto offset = number_at(object, "field_offset_t");
  if (!offset) return dash;
  const auto error = number_at(object, "field_offset_err_t");
  return format_with_error(*offset * 1e3, error ? std::optional<double>(*error * 1e3) : std::nullopt, "mT");
}

}  // namespace

void print_sweeps_table(const json& sweeps, std::ostream& out) {
  Table table({"sample", "cooldown", "sweep", "dir", "start (UTC)", "length", "field", "offset", "points",
                     "T", "T spread", "fitted", "notes"});
  for (const auto& s : sweeps) {
    std::string field = dash;
    if (const auto lo = number_at(s, "field_min_t"), hi = number_at(s, "field_max_t"); lo && hi) {
      field = format_number(*lo * 1e3, 4) + " .. " + format_field_mt(*hi);
    }
    std::string length = dash;
    if (const auto a = number_at(s, "t_start"), b = number_at(s, "t_end"); a && b) {
      length = format_number(*b - *a, 4) + " s";
    }
    std::string notes;
    auto note = [&](const std::string& n) { notes += (notes.empty() ? "" : ", ") + n; };
    if (flag_at(s, "temperature_unstable")) note("T unstable");
    if (flag_at(s, "truncated")) note("truncated");
    if (const auto n = number_at(s, "n_overload"); n && *n > 0) note(format_number(*n, 10) + " overloaded");
    if (const std::string advice = string_at(s, "advice"); !advice.empty()) note(advice);
    table.add({text_at(s, "sample"), text_at(s, "cooldown"), text_at(s, "index"), text_at(s, "direction"),
               time_at(s, "t_start"), length,
               field, field_offset_at(s), text_at(s, "n_points"), temperature_at(s, "temperature_k"),
               temperature_at(s, "temperature_spread_k"), text_at(s, "fitted"), notes.empty() ? dash : notes});
  }
  table.print(out);
}

void print_fits_table(const json& fits, std::ostream& out) {
  Table table({"sample", "cooldown", "sweep", "T", "L_phi", "alpha", "L_so", "chi2_red", "points", "window",
                     "offset", "used", "notes"});
  for (const auto& f : fits) {
    std::string notes;
    auto note = [&](const std::string& n) { notes += (notes.empty() ? "" : "; ") + n; };
    if (f.is_object() && f.contains("ok") && f["ok"].is_boolean() && !f["ok"].get<bool>()) {
      note("failed: " + text_at(f, "error"));
    }
    if (f.is_object() && f.contains("converged") && f["converged"].is_boolean() && !f["converged"].get<bool>()) {
      note("not converged");
    }
    if (f.is_object() && f.contains("combined_with") && f["combined_with"].is_number()) {
      note("with sweep " + text_at(f, "combined_with"));
    }
    if (f.is_object() && f.contains("flags") && f["flags"].is_array()) {
      for (const auto& flag : f["flags"]) {
        if (flag.is_string()) note(flag.get<std::string>());
      }
    }
    // Why a fit is left out of L_phi(T): the quality reasons, each a name
    // and its sentence; then the one line of advice.
    if (f.is_object() && f.contains("quality") && f["quality"].is_array() && !flag_at(f, "used_in_dephasing")) {
      for (const auto& reason : f["quality"]) {
        if (reason.is_string()) note(reason.get<std::string>());
      }
    }
    if (const std::string advice = string_at(f, "advice"); !advice.empty()) note("advice: " + advice);
    const auto window = number_at(f, "field_window_t");
    table.add({text_at(f, "sample"), text_at(f, "cooldown"), text_at(f, "sweep_index"),
               temperature_at(f, "temperature_k"),
               length_at(f, "lphi_m", "lphi_err_m"), value_with_error(f, "alpha", "alpha_err"),
               length_at(f, "lso_m", "lso_err_m"), text_at(f, "chi2_red"), text_at(f, "n_points"),
               window ? format_field_mt(*window) : dash, field_offset_at(f), text_at(f, "used_in_dephasing"),
               notes.empty() ? dash : notes});
  }
  table.print(out);
}

void print_verdicts(const json& verdicts, std::ostream& out) {
  bool first = true;
  for (const auto& v : verdicts) {
    if (!first) out << '\n';
    first = false;
    out << text_at(v, "sample") << ": " << text_at(v, "state") << '\n';
    Table table({}, 2);
    table.add("cooldown", text_at(v, "cooldown"));
    table.add("exponent p", value_with_error(v, "exponent_p", "exponent_p_err"));
    table.add("L_phi saturation", length_at(v, "lphi_sat_m", "lphi_sat_err_m"));
    table.add("T_sat", temperature_at(v, "t_sat_k", "t_sat_err_k"));
    table.add("electrons cooling", text_at(v, "electrons_cooling"));
    table.add("likely cause", text_at(v, "likely_cause"));
    table.add("regime", text_at(v, "regime"));
    table.add("AAK ratio", value_with_error(v, "aak_ratio", "aak_ratio_err"));
    table.add("temperatures used", text_at(v, "n_points"));
    table.add("updated (UTC)", time_at(v, "updated_at"));
    table.print(out);
  }
}

void print_alerts_table(const json& alerts, std::ostream& out) {
  Table table({"id", "severity", "state", "rule", "subject", "raised (UTC)", "message"});
  for (const auto& a : alerts) {
    std::string subject = text_at(a, "subject");
    if (subject.empty()) subject = dash;
    table.add({text_at(a, "id"), text_at(a, "severity"), text_at(a, "state"), text_at(a, "rule"), subject,
               time_at(a, "raised_at"), text_at(a, "message")});
  }
  table.print(out);
}

std::string event_line(std::string_view topic, const json& body) {
  std::string line(topic);
  line += ' ';
  if (topic == "sweep") {
    line += text_at(body, "sample") + " sweep " + text_at(body, "index") + " (" + text_at(body, "direction") +
            ") ended " + time_at(body, "t_end") + ", " + text_at(body, "n_points") + " points at " +
            temperature_at(body, "temperature_k");
    if (flag_at(body, "temperature_unstable")) line += ", T unstable";
  } else if (topic == "fit") {
    line += text_at(body, "sample") + " sweep " + text_at(body, "sweep_index") + " at " +
            temperature_at(body, "temperature_k") + ": ";
    if (body.is_object() && body.contains("ok") && body["ok"].is_boolean() && !body["ok"].get<bool>()) {
      line += "failed: " + text_at(body, "error");
    } else {
      line += "L_phi " + length_at(body, "lphi_m", "lphi_err_m") + ", alpha " +
              value_with_error(body, "alpha", "alpha_err") + ", chi2_red " + text_at(body, "chi2_red");
      if (number_at(body, "field_offset_t")) line += ", field offset " + field_offset_at(body);
      if (body.is_object() && body.contains("used_in_dephasing") && body["used_in_dephasing"].is_boolean() &&
          !body["used_in_dephasing"].get<bool>()) {
        line += ", not used";
      }
    }
    if (const std::string advice = string_at(body, "advice"); !advice.empty()) line += "; advice: " + advice;
  } else if (topic == "verdict") {
    line += text_at(body, "sample") + " " + text_at(body, "state") + ", p " +
            value_with_error(body, "exponent_p", "exponent_p_err") + ", T_sat " +
            temperature_at(body, "t_sat_k", "t_sat_err_k") + ", electrons cooling " +
            text_at(body, "electrons_cooling");
    if (number_at(body, "lphi_sat_m")) line += ", L_sat " + length_at(body, "lphi_sat_m", "lphi_sat_err_m");
    if (body.is_object() && body.contains("likely_cause") && body["likely_cause"].is_string()) {
      line += ", likely cause " + text_at(body, "likely_cause");
    }
    if (number_at(body, "cooldown")) line += ", cooldown " + text_at(body, "cooldown");
  } else if (topic == "alert") {
    line += "#" + text_at(body, "id") + " " + text_at(body, "severity") + " " + text_at(body, "state") + " " +
            text_at(body, "rule");
    const std::string subject = text_at(body, "subject");
    if (!subject.empty() && subject != dash) line += " [" + subject + "]";
    line += ": " + text_at(body, "message");
  } else {
    line += body.dump();
  }
  return line;
}

}  // namespace lphi::client
