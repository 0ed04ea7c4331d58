#include "drivers/instrument/driver_config.hpp"

#include <array>
#include <cmath>

#include "drivers/instrument/quantities.hpp"

namespace lphi::drivers {
namespace {

std::string check_common(const std::string& who, const std::string& source,
                         const ConnectionOptions& c, const BackoffOptions& b, const OutletOptions& o,
                         bool port_zero_ok) {
  if (source.empty()) return who + ": source must not be empty";
  const std::string at = who + " '" + source + "': ";
  if (c.host.empty()) return at + "connection.host must not be empty";
  if (c.port == 0 && !port_zero_ok) return at + "connection.port must be set (1-65535)";
  if (c.connect_timeout.count() <= 0) return at + "connection.connect_timeout must be positive";
  if (c.terminator.empty() || c.terminator.size() > 4)
    return at + "connection.terminator must be 1 to 4 bytes (\"\\n\" or \"\\r\\n\")";
  if (c.max_line_bytes < 16 || c.max_line_bytes > (1u << 20))
    return at + "connection.max_line_bytes must be between 16 and 1048576";
  if (b.min_delay.count() <= 0) return at + "backoff.min_delay must be positive";
  if (b.max_delay < b.min_delay) return at + "backoff.max_delay must not be below backoff.min_delay";
  if (!std::isfinite(b.factor) || b.factor < 1.0) return at + "backoff.factor must be at least 1";
  if (!std::isfinite(b.jitter) || b.jitter < 0.0 || b.jitter > 1.0)
    return at + "backoff.jitter must lie in [0, 1]";
  if (o.first_seq < 0) return at + "outlet.first_seq must not be negative";
  if (o.max_buffered_readings == 0) return at + "outlet.max_buffered_readings must be at least 1";
  if (o.max_batch_readings == 0) return at + "outlet.max_batch_readings must be at least 1";
  if (o.sink_retry_interval.count() <= 0) return at + "outlet.sink_retry_interval must be positive";
  return {};
}

std::string check_required(protocol::SourceKind kind, const std::vector<const FieldMap*>& fields,
                           const std::string& at) {
  for (const auto q : required_for(kind)) {
    bool found = false;
    for (const auto* f : fields) found = found || f->quantity == quantity_name(q);
    if (!found)
      return at + "no field maps to '" + std::string(quantity_name(q)) + "', which a " +
             std::string(protocol::kind_name(kind)) + " reading needs";
  }
  return {};
}

}  // namespace

std::string validate(const ScpiTcpConfig& c) {
  std::string e = check_common("scpi-tcp driver", c.source, c.connection, c.backoff, c.outlet, false);
  if (!e.empty()) return e;
  const std::string at = "scpi-tcp driver '" + c.source + "': ";
  if (c.poll_interval.count() <= 0) return at + "poll_interval must be positive";
  if (c.reply_timeout.count() <= 0) return at + "reply_timeout must be positive";
  if (c.stall_after.count() <= 0) return at + "stall_after must be positive";
  if (c.identity_query.find_first_of("\r\n") != std::string::npos)
    return at + "identity_query must not contain a line break";
  if (c.queries.empty()) return at + "at least one query is needed";
  std::vector<FieldMap> all;
  std::vector<const FieldMap*> pointers;
  for (std::size_t i = 0; i < c.queries.size(); ++i) {
    const auto& q = c.queries[i];
    const std::string where = at + "query " + std::to_string(i + 1);
    if (q.send.empty()) return where + ": send must not be empty";
    if (q.send.find_first_of("\r\n") != std::string::npos ||
        q.send.find(c.connection.terminator) != std::string::npos)
      return where + ": send must not contain a line break or the terminator";
    if (q.fields.empty()) return where + " ('" + q.send + "'): no fields mapped";
    for (const auto& f : q.fields) all.push_back(f);
  }
  // Each quantity once across all queries of a poll.
  e = check_fields(c.kind, all, false, at + "queries:");
  if (!e.empty()) return e;
  for (const auto& f : all) pointers.push_back(&f);
  return check_required(c.kind, pointers, at);
}

std::string validate(const LineStreamConfig& c) {
  const bool listen = c.mode == LineStreamConfig::Mode::listen;
  std::string e = check_common("line-stream driver", c.source, c.connection, c.backoff, c.outlet, listen);
  if (!e.empty()) return e;
  const std::string at = "line-stream driver '" + c.source + "': ";
  if (c.silence_timeout.count() <= 0) return at + "silence_timeout must be positive";
  if (c.stall_after.count() <= 0) return at + "stall_after must be positive";
  const bool json = c.format == LineStreamConfig::Format::json;
  if (!json && (c.csv_delimiter == '\n' || c.csv_delimiter == '\r' || c.csv_delimiter == '\0' ||
                c.connection.terminator.find(c.csv_delimiter) != std::string::npos))
    return at + "csv_delimiter must not be a line break or part of the terminator";
  if (c.fields.empty()) return at + "no fields mapped";
  e = check_fields(c.kind, c.fields, json, at + "fields:");
  if (!e.empty()) return e;
  std::vector<const FieldMap*> pointers;
  for (const auto& f : c.fields) pointers.push_back(&f);
  return check_required(c.kind, pointers, at);
}

}  // namespace lphi::drivers
