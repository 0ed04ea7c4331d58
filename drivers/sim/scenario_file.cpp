#include "drivers/sim/scenario_file.hpp"

#include <cmath>
#include <fstream>
#include <initializer_list>
#include <sstream>
#include <toml++/toml.h>

#include "schema/text/toml_keys.hpp"

namespace lphi::sim {
namespace {

// Reads typed values out of toml tables and remembers the first error.
class Reader {
 public:
  explicit Reader(std::string_view origin) : origin_(origin) {}
  bool failed() const { return !error_.empty(); }
  const std::string& error() const { return error_; }

  void fail(const toml::source_region& where, const std::string& message) {
    if (failed()) return;
    error_ = origin_ + ":" + std::to_string(where.begin.line) + ": " + message;
  }
  void fail(const std::string& message) {
    if (!failed()) error_ = origin_ + ": " + message;
  }

  // Every key of `table` must be one of `allowed`.
  void known_keys(const toml::table& table, const std::string& path,
                  std::initializer_list<std::string_view> allowed) {
    keys_.unknown_keys(table, without_dot(path), allowed);
    take_error();
  }

  void number(const toml::table& t, std::string_view key, const std::string& path, double& out) {
    const toml::node* n = t.get(key);
    if (n == nullptr) return;
    if (auto v = keys_.number(*n, path + std::string(key))) out = *v;
    take_error();
  }

  void integer(const toml::table& t, std::string_view key, const std::string& path, long long& out) {
    const toml::node* n = t.get(key);
    if (n == nullptr) return;
    if (auto v = keys_.integer(*n, path + std::string(key))) out = *v;
    take_error();
  }

  void text(const toml::table& t, std::string_view key, const std::string& path, std::string& out) {
    const toml::node* n = t.get(key);
    if (n == nullptr) return;
    if (auto v = keys_.string(*n, path + std::string(key))) out = *v;
    take_error();
  }

  const toml::table* table(const toml::table& t, std::string_view key) {
    const toml::node* n = t.get(key);
    if (n == nullptr) return nullptr;
    if (!n->is_table()) {
      std::string message = "'";
      message.append(key).append("' must be a table");
      fail(n->source(), message);
      return nullptr;
    }
    return n->as_table();
  }

  const toml::array* array_of_tables(const toml::table& t, std::string_view key,
                                     const std::string& path) {
    const toml::node* n = t.get(key);
    if (n == nullptr) return nullptr;
    if (!n->is_array_of_tables()) {
      fail(n->source(), "'" + path + std::string(key) + "' must be written as [[" + path +
                            std::string(key) + "]] tables");
      return nullptr;
    }
    return n->as_array();
  }

 private:
  static std::string_view without_dot(std::string_view path) {
    if (!path.empty() && path.back() == '.') path.remove_suffix(1);
    return path;
  }
  // The checker's first error in this reader's words: "unknown key 'a.b'",
  // "'a.b' must be a number".
  void take_error() {
    if (errors_.empty()) return;
    const text::TomlError& e = errors_.front();
    const std::string message =
        e.message == "unknown key" ? "unknown key '" + e.key + "'" : "'" + e.key + "' " + e.message;
    if (!failed()) error_ = origin_ + ":" + std::to_string(e.line) + ": " + message;
    errors_.clear();
  }

  std::string origin_;
  std::string error_;
  std::vector<text::TomlError> errors_;
  text::TomlKeys keys_{errors_};
};

void read_sample(Reader& r, const toml::table& t, Sample& s) {
  r.known_keys(t, "sample.",
               {"model", "squares", "width_m", "thickness_m", "rsq_ohm", "reference_temperature_k",
                "diffusion_m2s", "mean_free_path_m", "alpha", "lso_m", "interaction_f"});
  std::string model = std::string(mc::model_name(s.model));
  r.text(t, "model", "sample.", model);
  // The scenario files spell the spin-orbit model with a hyphen, as the CLI does.
  std::string canonical = model;
  if (canonical == "hln2d-so") canonical = "hln2d_so";
  if (auto m = mc::model_from_name(canonical)) {
    s.model = *m;
  } else if (auto m2 = mc::model_from_name(model)) {
    s.model = *m2;
  } else {
    r.fail(t.get("model")->source(),
           "'sample.model' must be hln2d, hln2d-so, wire1d or kawabata3d (got '" + model + "')");
  }
  r.number(t, "squares", "sample.", s.squares);
  r.number(t, "width_m", "sample.", s.width_m);
  r.number(t, "thickness_m", "sample.", s.thickness_m);
  r.number(t, "rsq_ohm", "sample.", s.drude_rsq_ohm);
  r.number(t, "reference_temperature_k", "sample.", s.reference_temperature_k);
  r.number(t, "diffusion_m2s", "sample.", s.diffusion_m2s);
  r.number(t, "mean_free_path_m", "sample.", s.mean_free_path_m);
  r.number(t, "alpha", "sample.", s.alpha);
  r.number(t, "lso_m", "sample.", s.lso_m);
  r.number(t, "interaction_f", "sample.", s.interaction_f);
}

void read_plateau_keys(Reader& r, const toml::table& t, const std::string& path, Plateau& p) {
  r.number(t, "ramp_s", path, p.ramp_s);
  r.number(t, "dwell_s", path, p.dwell_s);
  long long sweeps = p.sweeps;
  r.integer(t, "sweeps", path, sweeps);
  if (sweeps < 0 || sweeps > 1000) {
    r.fail(t.get("sweeps")->source(), "'" + path + "sweeps' must be 0..1000");
  } else {
    p.sweeps = static_cast<int>(sweeps);
  }
  r.number(t, "max_field_t", path, p.max_field_t);
  r.number(t, "rate_t_per_s", path, p.rate_t_per_s);
  std::string mode = sweep_mode_name(p.sweep_mode);
  r.text(t, "sweep_mode", path, mode);
  if (mode == "both") p.sweep_mode = SweepMode::both;
  else if (mode == "up") p.sweep_mode = SweepMode::up;
  else if (mode == "unipolar") p.sweep_mode = SweepMode::unipolar;
  else r.fail(t.get("sweep_mode")->source(), "'" + path + "sweep_mode' must be both, up or unipolar (got '" + mode + "')");
}

void read_programme(Reader& r, const toml::table& t, Programme& p) {
  r.known_keys(t, "programme.",
               {"start_temperature_k", "ramp_s", "dwell_s", "sweeps", "max_field_t",
                "rate_t_per_s", "sweep_mode", "plateau"});
  r.number(t, "start_temperature_k", "programme.", p.start_temperature_k);
  Plateau defaults;  // [programme] keys are the defaults of every plateau
  read_plateau_keys(r, t, "programme.", defaults);
  const toml::array* plateaus = r.array_of_tables(t, "plateau", "programme.");
  if (plateaus == nullptr) return;
  for (const toml::node& n : *plateaus) {
    const toml::table& q = *n.as_table();
    r.known_keys(q, "programme.plateau.",
                 {"temperature_k", "ramp_s", "dwell_s", "sweeps", "max_field_t", "rate_t_per_s",
                  "sweep_mode"});
    Plateau plateau = defaults;
    if (q.get("temperature_k") == nullptr)
      r.fail(q.source(), "[[programme.plateau]] needs 'temperature_k'");
    r.number(q, "temperature_k", "programme.plateau.", plateau.temperature_k);
    read_plateau_keys(r, q, "programme.plateau.", plateau);
    p.plateaus.push_back(plateau);
  }
}

std::optional<Instrument> instrument_from_name(std::string_view name) {
  for (Instrument i : kInstruments)
    if (name == instrument_name(i)) return i;
  return std::nullopt;
}

// A fault's key without a usable default: its absence is an error naming
// the key and the fault's kind.
void require(Reader& r, const toml::table& t, std::string_view kind, std::string_view key) {
  if (t.get(key) == nullptr)
    r.fail(t.source(), "[[fault]] kind = \"" + std::string(kind) + "\" needs 'fault." +
                           std::string(key) + "'");
}

// A fault kind that may appear once per scenario.
void once(Reader& r, const toml::table& t, std::string_view kind, bool& seen) {
  if (seen) r.fail(t.source(), "only one " + std::string(kind) + " fault is allowed");
  seen = true;
}

struct SeenOnce {
  bool lag = false, drift = false, gain = false, spikes = false;
};

void read_fault(Reader& r, const toml::table& t, Faults& f, SeenOnce& seen) {
  std::string kind;
  r.text(t, "kind", "fault.", kind);
  if (kind == "remanent-field") {
    r.known_keys(t, "fault.", {"kind", "field_t", "start_s"});
    require(r, t, kind, "field_t");
    Faults::Remanence m;
    r.number(t, "field_t", "fault.", m.field_t);
    r.number(t, "start_s", "fault.", m.start_s);
    f.remanences.push_back(m);
  } else if (kind == "field-reading-lag") {
    r.known_keys(t, "fault.", {"kind", "delay_s"});
    require(r, t, kind, "delay_s");
    once(r, t, kind, seen.lag);
    r.number(t, "delay_s", "fault.", f.field_lag_s);
  } else if (kind == "lockin-time-constant") {
    r.known_keys(t, "fault.", {"kind", "time_constant_s", "start_s", "duration_s"});
    require(r, t, kind, "time_constant_s");
    Faults::TimeConstant c;
    r.number(t, "time_constant_s", "fault.", c.time_constant_s);
    r.number(t, "start_s", "fault.", c.start_s);
    r.number(t, "duration_s", "fault.", c.duration_s);
    f.time_constants.push_back(c);
  } else if (kind == "lockin-hole") {
    r.known_keys(t, "fault.", {"kind", "from_t", "to_t", "start_s", "duration_s"});
    require(r, t, kind, "from_t");
    require(r, t, kind, "to_t");
    Faults::Hole h;
    r.number(t, "from_t", "fault.", h.from_t);
    r.number(t, "to_t", "fault.", h.to_t);
    r.number(t, "start_s", "fault.", h.start_s);
    r.number(t, "duration_s", "fault.", h.duration_s);
    f.holes.push_back(h);
  } else if (kind == "plateau-drift") {
    r.known_keys(t, "fault.", {"kind", "relative"});
    require(r, t, kind, "relative");
    once(r, t, kind, seen.drift);
    r.number(t, "relative", "fault.", f.plateau_drift_relative);
  } else if (kind == "gain-drift") {
    r.known_keys(t, "fault.", {"kind", "per_hour", "start_s"});
    require(r, t, kind, "per_hour");
    once(r, t, kind, seen.gain);
    r.number(t, "per_hour", "fault.", f.gain_drift_per_hour);
    r.number(t, "start_s", "fault.", f.gain_drift_start_s);
  } else if (kind == "spikes") {
    r.known_keys(t, "fault.", {"kind", "probability", "size_sigma"});
    require(r, t, kind, "probability");
    require(r, t, kind, "size_sigma");
    once(r, t, kind, seen.spikes);
    r.number(t, "probability", "fault.", f.spike_probability);
    r.number(t, "size_sigma", "fault.", f.spike_size_sigma);
  } else if (kind == "lockin-dropout") {
    r.known_keys(t, "fault.", {"kind", "start_s", "duration_s", "mode"});
    Faults::Dropout d;
    r.number(t, "start_s", "fault.", d.start_s);
    r.number(t, "duration_s", "fault.", d.duration_s);
    std::string mode = "close";
    r.text(t, "mode", "fault.", mode);
    if (mode != "close" && mode != "silent")
      r.fail(t.get("mode")->source(), "'fault.mode' must be close or silent (got '" + mode + "')");
    d.silent = mode == "silent";
    f.dropouts.push_back(d);
  } else if (kind == "thermometer-stuck") {
    r.known_keys(t, "fault.", {"kind", "start_s", "duration_s"});
    Faults::Window w;
    r.number(t, "start_s", "fault.", w.start_s);
    r.number(t, "duration_s", "fault.", w.duration_s);
    f.stuck.push_back(w);
  } else if (kind == "connection-reset") {
    r.known_keys(t, "fault.", {"kind", "at_s", "period_s", "instrument"});
    Faults::Reset reset;
    r.number(t, "at_s", "fault.", reset.at_s);
    r.number(t, "period_s", "fault.", reset.period_s);
    std::string which = "all";
    r.text(t, "instrument", "fault.", which);
    if (which != "all") {
      if (auto i = instrument_from_name(which)) {
        reset.all = false;
        reset.instrument = *i;
      } else {
        r.fail(t.get("instrument")->source(),
               "'fault.instrument' must be all, lockin, thermometer or magnet (got '" + which + "')");
      }
    }
    f.resets.push_back(reset);
  } else if (kind == "electron-heating") {
    r.known_keys(t, "fault.", {"kind", "start_s", "duration_s", "floor_k", "exponent"});
    if (f.heating) r.fail(t.source(), "only one electron-heating fault is allowed");
    f.heating = true;
    r.number(t, "start_s", "fault.", f.heating_start_s);
    r.number(t, "duration_s", "fault.", f.heating_duration_s);
    r.number(t, "floor_k", "fault.", f.heating_floor_k);
    r.number(t, "exponent", "fault.", f.heating_exponent);
  } else if (kind == "lockin-range") {
    r.known_keys(t, "fault.", {"kind", "start_s", "duration_s", "range_v"});
    Faults::Range w;
    r.number(t, "start_s", "fault.", w.start_s);
    r.number(t, "duration_s", "fault.", w.duration_s);
    r.number(t, "range_v", "fault.", w.range_v);
    f.ranges.push_back(w);
  } else if (kind == "quadrature-pickup") {
    r.known_keys(t, "fault.", {"kind", "start_s", "duration_s", "fraction"});
    Faults::Pickup w;
    r.number(t, "start_s", "fault.", w.start_s);
    r.number(t, "duration_s", "fault.", w.duration_s);
    r.number(t, "fraction", "fault.", w.fraction);
    f.pickups.push_back(w);
  } else if (kind == "temperature-excursion") {
    r.known_keys(t, "fault.", {"kind", "start_s", "duration_s", "amplitude_k"});
    Faults::Excursion w;
    r.number(t, "start_s", "fault.", w.start_s);
    r.number(t, "duration_s", "fault.", w.duration_s);
    r.number(t, "amplitude_k", "fault.", w.amplitude_k);
    f.excursions.push_back(w);
  } else if (kind == "open-contact") {
    r.known_keys(t, "fault.", {"kind", "start_s", "duration_s"});
    Faults::Window w;
    r.number(t, "start_s", "fault.", w.start_s);
    r.number(t, "duration_s", "fault.", w.duration_s);
    f.open_contacts.push_back(w);
  } else {
    r.fail(t.source(), "'fault.kind' must be lockin-dropout, thermometer-stuck, connection-reset, "
                       "electron-heating, lockin-range, quadrature-pickup, temperature-excursion, "
                       "open-contact, remanent-field, field-reading-lag, lockin-time-constant, "
                       "lockin-hole, plateau-drift, gain-drift or spikes (got '" + kind + "')");
  }
}

}  // namespace

ScenarioLoad parse_scenario(std::string_view toml_text, std::string_view origin) {
  ScenarioLoad out;
  toml::table root;
  try {
    root = toml::parse(toml_text, origin);
  } catch (const toml::parse_error& e) {
    out.error = std::string(origin) + ":" + std::to_string(e.source().begin.line) + ": " +
                std::string(e.description());
    return out;
  }
  Reader r(origin);
  Scenario s;
  r.known_keys(root, "", {"name", "seed", "sample", "dephasing", "lockin", "thermometer", "magnet",
                          "noise", "programme", "ports", "fault"});
  r.text(root, "name", "", s.name);
  long long seed = 1;
  r.integer(root, "seed", "", seed);
  s.seed = static_cast<std::uint64_t>(seed);
  if (const toml::table* t = r.table(root, "sample")) read_sample(r, *t, s.sample);
  else r.fail("a [sample] table is needed");
  if (const toml::table* t = r.table(root, "dephasing")) {
    r.known_keys(*t, "dephasing.", {"gamma0_per_s", "a_per_s", "p"});
    r.number(*t, "gamma0_per_s", "dephasing.", s.dephasing.gamma0_per_s);
    r.number(*t, "a_per_s", "dephasing.", s.dephasing.a_per_s);
    r.number(*t, "p", "dephasing.", s.dephasing.p);
  }
  if (const toml::table* t = r.table(root, "lockin")) {
    r.known_keys(*t, "lockin.", {"current_a", "gain", "quadrature_fraction", "frequency_hz",
                                 "range_v", "time_constant_s"});
    r.number(*t, "current_a", "lockin.", s.lockin.current_a);
    r.number(*t, "gain", "lockin.", s.lockin.gain);
    r.number(*t, "quadrature_fraction", "lockin.", s.lockin.quadrature_fraction);
    r.number(*t, "frequency_hz", "lockin.", s.lockin.frequency_hz);
    r.number(*t, "range_v", "lockin.", s.lockin.range_v);
    r.number(*t, "time_constant_s", "lockin.", s.lockin.time_constant_s);
  }
  if (const toml::table* t = r.table(root, "thermometer")) {
    r.known_keys(*t, "thermometer.", {"r0_ohm", "t0_k"});
    r.number(*t, "r0_ohm", "thermometer.", s.thermometer.r0_ohm);
    r.number(*t, "t0_k", "thermometer.", s.thermometer.t0_k);
  }
  if (const toml::table* t = r.table(root, "magnet")) {
    r.known_keys(*t, "magnet.", {"limit_t", "max_rate_t_per_s"});
    r.number(*t, "limit_t", "magnet.", s.magnet.limit_t);
    r.number(*t, "max_rate_t_per_s", "magnet.", s.magnet.max_rate_t_per_s);
  }
  if (const toml::table* t = r.table(root, "noise")) {
    r.known_keys(*t, "noise.",
                 {"sample_interval_s", "lockin_x_v", "lockin_y_v", "temperature_rel", "field_t"});
    r.number(*t, "sample_interval_s", "noise.", s.noise.sample_interval_s);
    r.number(*t, "lockin_x_v", "noise.", s.noise.lockin_x_v);
    r.number(*t, "lockin_y_v", "noise.", s.noise.lockin_y_v);
    r.number(*t, "temperature_rel", "noise.", s.noise.temperature_rel);
    r.number(*t, "field_t", "noise.", s.noise.field_t);
  }
  if (const toml::table* t = r.table(root, "programme")) read_programme(r, *t, s.programme);
  else r.fail("a [programme] table with [[programme.plateau]] entries is needed");
  if (const toml::table* t = r.table(root, "ports")) {
    r.known_keys(*t, "ports.", {"lockin", "thermometer", "magnet"});
    for (Instrument i : kInstruments) {
      long long port = 0;
      r.integer(*t, instrument_name(i), "ports.", port);
      if (port < 0 || port > 65535) r.fail(t->get(instrument_name(i))->source(), "a port must be 0..65535");
      else s.ports[static_cast<int>(i)] = static_cast<int>(port);
    }
  }
  if (const toml::array* faults = r.array_of_tables(root, "fault", "")) {
    SeenOnce seen;
    for (const toml::node& n : *faults) read_fault(r, *n.as_table(), s.faults, seen);
  }
  if (r.failed()) {
    out.error = r.error();
    return out;
  }
  if (auto e = scenario_error(s); !e.empty()) {
    out.error = std::string(origin) + ": " + e;
    return out;
  }
  out.scenario = std::move(s);
  return out;
}

ScenarioLoad load_scenario_file(const std::string& path) {
  std::ifstream in(path);
  if (!in) return {std::nullopt, "cannot read scenario file '" + path + "'"};
  std::ostringstream text;
  text << in.rdbuf();
  return parse_scenario(text.str(), path);
}

}  // namespace lphi::sim
