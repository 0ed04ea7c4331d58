// Human tables of the live-analysis commands (lphi sweeps, fits, verdict,
// alerts, watch): the JSON objects of lphid's control replies and events,
// SI values in, text out, in units chosen for reading (nm/um, mK/K, mT) and
// times as UTC ISO-8601. A value the daemon reports as null, or does not
// report, is shown as "-". --json output never goes through here.
#pragma once

#include <nlohmann/json.hpp>
#include <optional>
#include <ostream>
#include <string>
#include <string_view>
#include <vector>

namespace lphi::client {

// A Unix time as UTC ISO-8601 to the second: "2026-12-01T23:40:49Z".
// Non-finite or outside years 1..9999: "-".
std::string format_utc(double unix_s);

// T in mK below 1 K, else in K: "250.0 mK", "1.500 K" (four significant
// digits, or rounded to the error as format_with_error does).
std::string format_temperature(double temperature_k, std::optional<double> error_k = std::nullopt);

// A number member of a JSON object, or nothing when absent, null or not a number.
std::optional<double> number_at(const nlohmann::json& object, std::string_view key);

// The tables. Each takes the array of the reply ("sweeps", "fits",
// "verdicts", "alerts") and tolerates missing keys.
void print_sweeps_table(const nlohmann::json& sweeps, std::ostream& out);
void print_fits_table(const nlohmann::json& fits, std::ostream& out);
void print_verdicts(const nlohmann::json& verdicts, std::ostream& out);
void print_alerts_table(const nlohmann::json& alerts, std::ostream& out);

// One line for one event of the event socket (topic "sweep", "fit",
// "verdict" or "alert"), without a trailing newline.
std::string event_line(std::string_view topic, const nlohmann::json& body);

}  // namespace lphi::client
