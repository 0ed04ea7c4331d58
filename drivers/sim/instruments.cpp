#include "drivers/sim/instruments.hpp"

#include <fmt/format.h>
#include <array>
#include <cmath>
#include <cstdio>

#include "schema/text/text.hpp"

namespace lphi::sim {
namespace {

using scpi::format_number;

// Input ranges 1-2-5 from 1 uV to 1 V; time constants 1-3 from 1 ms to 1000 s.
// A requested value is rounded up to the next one, as lock-ins do.
constexpr std::array<double, 19> kRanges = {1e-6, 2e-6, 5e-6, 1e-5, 2e-5, 5e-5, 1e-4,
                                            2e-4, 5e-4, 1e-3, 2e-3, 5e-3, 1e-2, 2e-2,
                                            5e-2, 0.1,  0.2,  0.5,  1.0};
constexpr std::array<double, 13> kTimeConstants = {1e-3, 3e-3, 1e-2, 3e-2, 0.1, 0.3, 1.0,
                                                   3.0,  10.0, 30.0, 100.0, 300.0, 1000.0};

template <std::size_t N>
std::optional<double> round_up(const std::array<double, N>& steps, double v) {
  for (double s : steps)
    if (v <= s * (1.0 + 1e-9)) return s;
  return std::nullopt;
}

struct Help {
  const char* command;
  const char* reply;
};

constexpr Help kCommon[] = {
    {"*IDN?", "lphi-sim,<model>,<serial>,<version>"},
    {"*RST", "restore the scenario's settings (the magnet resumes the programme)"},
    {"*CLS", "clear the error queue"},
    {"*OPC?", "1"},
    {"SYSTem:ERRor?", "<code>,\"<message>\"; 0,\"No error\" when the queue is empty"},
    {"SYSTem:TIME?", "<t>: simulated instrument time in s since lphi-sim started"},
    {"SYSTem:SPEED?", "<speed>: simulated seconds per wall-clock second"},
};
constexpr Help kLockin[] = {
    {"MEASure:ALL?", "<t>,<x_v>,<y_v>,<overload 0|1>"},
    {"MEASure:X?", "<x_v> (in-phase, V rms, after the preamplifier)"},
    {"MEASure:Y?", "<y_v> (quadrature, V rms)"},
    {"STATus:OVLD?", "<0|1>: |X| or |Y| at or above the input range"},
    {"SENSe:RANGe <v> / SENSe:RANGe?", "input range in V, 1-2-5 steps 1e-6..1, rounded up"},
    {"SENSe:TCONstant <s> / SENSe:TCONstant?", "time constant in s, 1-3 steps 1e-3..1000, rounded up"},
    {"SOURce:FREQuency <hz> / SOURce:FREQuency?", "reference frequency in Hz, 0.1..1e5"},
    {"SOURce:CURRent?", "<i_a>: excitation current, A rms (set by the scenario)"},
    {"SENSe:GAIN?", "<gain>: preamplifier voltage gain (set by the scenario)"},
};
constexpr Help kThermometer[] = {
    {"MEASure:ALL?", "<t>,<temperature_k>,<resistance_ohm>"},
    {"MEASure:TEMPerature?", "<temperature_k>"},
    {"MEASure:RESistance?", "<resistance_ohm>: the sensor's resistance"},
};
constexpr Help kMagnet[] = {
    {"MEASure:ALL?", "<t>,<field_t>,<target_t>,<rate_t_per_s>,<manual 0|1>"},
    {"MEASure:FIELd?", "<field_t>"},
    {"SOURce:TARGet <t> / SOURce:TARGet?", "set: take the magnet over from the programme and ramp to <t>"},
    {"SOURce:RATE <t_per_s> / SOURce:RATE?", "set: the ramp rate of manual ramps (takes the magnet over)"},
    {"SOURce:MODE PROGramme|MANual / SOURce:MODE?", "PROG resumes the scenario's programme at once"},
};

const char* model_of(Instrument k) {
  switch (k) {
    case Instrument::lockin: return "SIM-LIA";
    case Instrument::thermometer: return "SIM-THERM";
    case Instrument::magnet: return "SIM-MAGNET";
  }
  return "?";
}

bool no_args(const scpi::Request& r, scpi::Error& error, bool& failed) {
  if (r.args.empty()) return true;
  error = scpi::parameter_not_allowed(r.header);
  failed = true;
  return false;
}

std::optional<double> one_number(const scpi::Request& r, scpi::Error& error, bool& failed) {
  if (r.args.empty()) {
    error = scpi::missing_parameter(r.header);
  } else if (r.args.size() > 1) {
    error = scpi::parameter_not_allowed(r.header);
  } else if (auto v = text::parse_number(r.args[0])) {
    return v;
  } else {
    error = scpi::data_type_error(r.args[0].substr(0, 40));
  }
  failed = true;
  return std::nullopt;
}

}  // namespace

SimInstrument::SimInstrument(Instrument kind, World& world, double speed, double clock_origin_s)
    : kind_(kind), world_(&world), speed_(speed), clock_origin_s_(clock_origin_s) {
  reset();
}

std::string SimInstrument::clock_reading(double t_s) const {
  if (clock_origin_s_ == 0.0) return format_number(t_s);
  // An epoch time needs more than %.12g's digits to keep milliseconds.
  return fmt::format("{:.6f}", clock_origin_s_ + t_s);
}

void SimInstrument::reset() {
  const LockinSettings& l = world_->scenario().lockin;
  range_v_ = round_up(kRanges, l.range_v).value_or(kRanges.back());
  time_constant_s_ = l.time_constant_s;
  frequency_hz_ = l.frequency_hz;
}

std::optional<std::string> SimInstrument::execute(std::string_view line, double t_s) {
  scpi::Error error;
  bool failed = false;
  const auto request = scpi::parse(line, error, failed);
  std::optional<std::string> reply;
  if (request) reply = run(*request, t_s, error, failed);
  if (!failed) return reply;
  errors_.push(error);
  const bool was_query = request ? request->query : line.find('?') != std::string_view::npos;
  if (was_query) return "ERR " + scpi::format_error(error);
  return std::nullopt;
}

std::string SimInstrument::line_too_long() {
  const auto e = scpi::too_much_data("line longer than " + std::to_string(scpi::kMaxLineBytes) + " bytes");
  errors_.push(e);
  return "ERR " + scpi::format_error(e);
}

std::optional<std::string> SimInstrument::run(const scpi::Request& r, double t_s,
                                              scpi::Error& error, bool& failed) {
  using scpi::matches;
  if (r.query && matches("*IDN", r) && no_args(r, error, failed))
    return std::string("lphi-sim,") + model_of(kind_) + ",0,0.1";
  if (!r.query && matches("*RST", r) && no_args(r, error, failed)) {
    reset();
    if (kind_ == Instrument::magnet) world_->magnet().resume_programme(t_s);
    return std::nullopt;
  }
  if (!r.query && matches("*CLS", r) && no_args(r, error, failed)) {
    errors_.clear();
    return std::nullopt;
  }
  if (r.query && matches("*OPC", r) && no_args(r, error, failed)) return "1";
  if (r.query && matches("SYSTem:ERRor", r) && no_args(r, error, failed))
    return scpi::format_error(errors_.pop());
  if (r.query && matches("SYSTem:TIME", r) && no_args(r, error, failed)) return clock_reading(t_s);
  if (r.query && matches("SYSTem:SPEED", r) && no_args(r, error, failed)) return format_number(speed_);
  if (failed) return std::nullopt;
  switch (kind_) {
    case Instrument::lockin: return run_lockin(r, t_s, error, failed);
    case Instrument::thermometer: return run_thermometer(r, t_s, error, failed);
    case Instrument::magnet: return run_magnet(r, t_s, error, failed);
  }
  return std::nullopt;
}

std::optional<std::string> SimInstrument::run_lockin(const scpi::Request& r, double t_s,
                                                     scpi::Error& error, bool& failed) {
  using scpi::matches;
  if (r.query && r.nodes.size() == 2 && matches("MEASure:ALL", r) && no_args(r, error, failed)) {
    const LockinReading x = world_->lockin(t_s, time_constant_s_, range_v_);
    return clock_reading(t_s) + "," + format_number(x.x_v) + "," + format_number(x.y_v) + "," +
           (x.overload ? "1" : "0");
  }
  if (r.query && matches("MEASure:X", r) && no_args(r, error, failed))
    return format_number(world_->lockin(t_s, time_constant_s_, range_v_).x_v);
  if (r.query && matches("MEASure:Y", r) && no_args(r, error, failed))
    return format_number(world_->lockin(t_s, time_constant_s_, range_v_).y_v);
  if (r.query && matches("STATus:OVLD", r) && no_args(r, error, failed))
    return world_->lockin(t_s, time_constant_s_, range_v_).overload ? "1" : "0";
  if (matches("SENSe:RANGe", r)) {
    if (r.query) return no_args(r, error, failed) ? std::optional(format_number(world_->lockin_range_v(t_s, range_v_))) : std::nullopt;
    if (auto v = one_number(r, error, failed)) {
      if (auto step = round_up(kRanges, *v); step && *v > 0) range_v_ = *step;
      else { error = scpi::data_out_of_range(r.args[0]); failed = true; }
    }
    return std::nullopt;
  }
  if (matches("SENSe:TCONstant", r)) {
    if (r.query)
      return no_args(r, error, failed)
                 ? std::optional(format_number(world_->lockin_time_constant_s(t_s, time_constant_s_)))
                 : std::nullopt;
    if (auto v = one_number(r, error, failed)) {
      if (auto step = round_up(kTimeConstants, *v); step && *v > 0) time_constant_s_ = *step;
      else { error = scpi::data_out_of_range(r.args[0]); failed = true; }
    }
    return std::nullopt;
  }
  if (matches("SOURce:FREQuency", r)) {
    if (r.query) return no_args(r, error, failed) ? std::optional(format_number(frequency_hz_)) : std::nullopt;
    if (auto v = one_number(r, error, failed)) {
      if (*v >= 0.1 && *v <= 1e5) frequency_hz_ = *v;
      else { error = scpi::data_out_of_range(r.args[0]); failed = true; }
    }
    return std::nullopt;
  }
  if (r.query && matches("SOURce:CURRent", r) && no_args(r, error, failed))
    return format_number(world_->scenario().lockin.current_a);
  if (r.query && matches("SENSe:GAIN", r) && no_args(r, error, failed))
    return format_number(world_->scenario().lockin.gain);
  if (!failed) {
    error = scpi::undefined_header(r.header);
    failed = true;
  }
  return std::nullopt;
}

std::optional<std::string> SimInstrument::run_thermometer(const scpi::Request& r, double t_s,
                                                          scpi::Error& error, bool& failed) {
  using scpi::matches;
  if (r.query && matches("MEASure:ALL", r) && no_args(r, error, failed)) {
    const ThermometerReading th = world_->thermometer(t_s);
    return clock_reading(t_s) + "," + format_number(th.temperature_k) + "," +
           format_number(th.resistance_ohm);
  }
  if (r.query && matches("MEASure:TEMPerature", r) && no_args(r, error, failed))
    return format_number(world_->thermometer(t_s).temperature_k);
  if (r.query && matches("MEASure:RESistance", r) && no_args(r, error, failed))
    return format_number(world_->thermometer(t_s).resistance_ohm);
  if (!failed) {
    error = scpi::undefined_header(r.header);
    failed = true;
  }
  return std::nullopt;
}

std::optional<std::string> SimInstrument::run_magnet(const scpi::Request& r, double t_s,
                                                     scpi::Error& error, bool& failed) {
  using scpi::matches;
  Magnet& m = world_->magnet();
  const MagnetSettings& limits = world_->scenario().magnet;
  if (r.query && matches("MEASure:ALL", r) && no_args(r, error, failed)) {
    return clock_reading(t_s) + "," + format_number(world_->field_reading_t(t_s)) + "," +
           format_number(m.target_t(t_s)) + "," + format_number(m.rate_t_per_s(t_s)) + "," +
           (m.manual() ? "1" : "0");
  }
  if (r.query && matches("MEASure:FIELd", r) && no_args(r, error, failed))
    return format_number(world_->field_reading_t(t_s));
  if (matches("SOURce:TARGet", r)) {
    if (r.query) return no_args(r, error, failed) ? std::optional(format_number(m.target_t(t_s))) : std::nullopt;
    if (auto v = one_number(r, error, failed)) {
      if (std::abs(*v) <= limits.limit_t) {
        const double rate = m.manual() ? m.rate_t_per_s(t_s) : limits.max_rate_t_per_s / 10.0;
        m.set_target(t_s, *v, rate);
      } else {
        error = scpi::data_out_of_range(r.args[0]);
        failed = true;
      }
    }
    return std::nullopt;
  }
  if (matches("SOURce:RATE", r)) {
    if (r.query) return no_args(r, error, failed) ? std::optional(format_number(m.rate_t_per_s(t_s))) : std::nullopt;
    if (auto v = one_number(r, error, failed)) {
      if (*v > 0 && *v <= limits.max_rate_t_per_s) {
        m.set_target(t_s, m.manual() ? m.target_t(t_s) : m.field_t(t_s), *v);
      } else {
        error = scpi::data_out_of_range(r.args[0]);
        failed = true;
      }
    }
    return std::nullopt;
  }
  if (matches("SOURce:MODE", r)) {
    if (r.query) return no_args(r, error, failed) ? std::optional<std::string>(m.manual() ? "MAN" : "PROG") : std::nullopt;
    if (r.args.size() != 1) {
      error = r.args.empty() ? scpi::missing_parameter(r.header) : scpi::parameter_not_allowed(r.header);
      failed = true;
      return std::nullopt;
    }
    scpi::Request word;
    word.nodes = {r.args[0]};
    for (char& c : word.nodes[0]) c = static_cast<char>(std::toupper(static_cast<unsigned char>(c)));
    if (matches("PROGramme", word)) {
      m.resume_programme(t_s);
    } else if (matches("MANual", word)) {
      if (!m.manual()) m.set_target(t_s, m.field_t(t_s), limits.max_rate_t_per_s / 10.0);
    } else {
      error = scpi::illegal_parameter(r.args[0].substr(0, 40));
      failed = true;
    }
    return std::nullopt;
  }
  if (!failed) {
    error = scpi::undefined_header(r.header);
    failed = true;
  }
  return std::nullopt;
}

std::string SimInstrument::command_list(Instrument kind) {
  std::string out;
  auto add = [&](const Help* begin, const Help* end) {
    for (const Help* h = begin; h != end; ++h) out += std::string("  ") + h->command + "\n      -> " + h->reply + "\n";
  };
  add(std::begin(kCommon), std::end(kCommon));
  switch (kind) {
    case Instrument::lockin: add(std::begin(kLockin), std::end(kLockin)); break;
    case Instrument::thermometer: add(std::begin(kThermometer), std::end(kThermometer)); break;
    case Instrument::magnet: add(std::begin(kMagnet), std::end(kMagnet)); break;
  }
  return out;
}

}  // namespace lphi::sim
