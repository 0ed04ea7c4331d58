// lphi fit: one magnetoconductance sweep from a CSV table to L_phi.
//
// rows -> R_sq (conductance.hpp) -> legs split at the field's reversals ->
// sweep::analyze (analysis/sweep_analysis.hpp), the same analysis lphid runs
// on a live sweep: spikes dropped, each leg centred on its cusp, coverage,
// prepare, fit, chi2_red against the sweep's own noise, usable with reasons.

#include <algorithm>
#include <cmath>
#include <iostream>
#include <memory>
#include <vector>

#include <nlohmann/json.hpp>

#include "analysis/conductance.hpp"
#include "analysis/magnetoconductance.hpp"
#include "analysis/sweep_analysis.hpp"
#include "analysis/sweep_fit.hpp"
#include "daemon/client/column_map.hpp"
#include "daemon/client/commands.hpp"
#include "daemon/client/csv_table.hpp"
#include "daemon/client/exit_codes.hpp"
#include "daemon/client/format.hpp"
#include "daemon/client/options.hpp"
#include "daemon/client/table_checks.hpp"
#include "schema/result_json.hpp"
#include "schema/text/csv_reader.hpp"

namespace lphi::client {
namespace {

// Which column holds the measured signal, and how it becomes R_sq.
enum class Signal { rsq, resistance, lockin };

constexpr std::string_view column_name(Signal s) {
  switch (s) {
    case Signal::rsq: return "rsq_ohm";
    case Signal::resistance: return "r_ohm";
    case Signal::lockin: return "lockin_x_v";
  }
  return "";
}

std::optional<Signal> signal_from_name(std::string_view name) {
  for (Signal s : {Signal::rsq, Signal::resistance, Signal::lockin}) {
    if (column_name(s) == name) return s;
  }
  return std::nullopt;
}

struct FitOutcome {
  std::string source;
  Signal signal = Signal::rsq;
  std::size_t rows = 0;
  std::vector<std::size_t> leg_rows;  // rows per leg, in file order
  std::size_t legs_found = 0;
  sweep::Analysis analysis;
};

// The keys lphid's fits also carry (schema/result_json.hpp), plus the
// input file, the signal column used and the rows read.
nlohmann::json to_json(const FitOutcome& o) {
  nlohmann::json j = schema::sweep_analysis_json(o.analysis);
  j["input"] = o.source;
  j["leg_rows"] = o.leg_rows;
  j["input_column"] = std::string(column_name(o.signal));
  j["n_rows"] = o.rows;
  return j;
}

std::string leg_description(const FitOutcome& o) {
  std::string text;
  std::size_t first = 1;
  for (std::size_t l = 0; l < o.leg_rows.size(); ++l) {
    const double direction = l < o.analysis.legs.size() ? o.analysis.legs[l].centre.direction : 0.0;
    text += (text.empty() ? "" : ", ") +
            std::string(direction > 0 ? "up" : (direction < 0 ? "down" : "leg")) + " rows " +
            std::to_string(first) + "-" + std::to_string(first + o.leg_rows[l] - 1);
    first += o.leg_rows[l];
  }
  if (o.legs_found > o.leg_rows.size())
    text += " (" + std::to_string(o.legs_found - o.leg_rows.size()) + " later legs not used)";
  return text;
}

void print_human(const FitOutcome& o, std::ostream& out) {
  const sweep::Analysis& a = o.analysis;
  const auto& r = a.fit;
  out << "lphi fit: " << o.source << " (" << mc::model_name(r.model) << ", from "
      << column_name(o.signal) << ", " << o.rows << " rows)\n";
  Table t({}, 2);
  t.add("legs", leg_description(o));
  if (a.offset_known) {
    std::string offset = format_with_error(a.field_offset_t * 1e3, a.field_offset_err_t * 1e3, "mT");
    if (std::isfinite(a.field_lag_s))
      offset += "  (lag between the legs " + format_with_error(a.field_lag_s, a.field_lag_err_s, "s") + ")";
    t.add("field offset", offset + ", corrected before the fit");
  } else {
    t.add("field offset", "not measured");
  }
  if (a.n_spikes > 0) t.add("spikes", std::to_string(a.n_spikes) + " dropped");
  if (r.ok) {
    t.add("L_phi", format_length(r.lphi_m, r.lphi_err_m));
    if (r.alpha) t.add("alpha", format_with_error(*r.alpha, r.alpha_err, ""));
    if (r.lso_m) t.add("L_so", format_length(*r.lso_m, r.lso_err_m));
    t.add("B_phi", format_field_mt(r.b_phi_t));
    t.add("window", "|B| <= " + format_field_mt(r.field_window_t) + " (data reach " +
                        format_field_mt(a.prepared.max_field_t) + ")");
    t.add("points", std::to_string(r.n_points) + " in the window" +
                        (a.prepared.symmetrized ? "" : " (one-sided, not symmetrized)"));
    t.add("chi2_red", a.chi2_red ? format_number(*a.chi2_red, 4) +
                                       " (against the sweep's own noise; errors scaled by " +
                                       format_number(a.error_scale, 3) + " for L_phi(T))"
                                 : std::string("unknown (the sweep's noise could not be estimated)"));
    // The solver's first sentence ("Function tolerance reached") is enough here.
    const std::string reason = r.termination.substr(0, r.termination.find('.'));
    t.add("converged", std::string(r.converged ? "yes" : "NO") + " (" + reason + ", " +
                           std::to_string(r.iterations) + " iterations)");
    t.add("R_sq(0)", format_with_error(a.rsq0_ohm, a.rsq0_err_ohm, "ohm") +
                         "  (sigma(0) = " + format_number(a.sigma0_s * 1e3, 6) +
                         " mS, with the fitted offset)");
    if (r.alpha && r.alpha_err) t.add("corr(alpha, L_phi)", format_number(r.corr_alpha_lphi, 3));
    if (r.background_s_per_t2) {
      t.add("background", format_with_error(*r.background_s_per_t2, r.background_err_s_per_t2,
                                            "S/T^2"));
    }
    if (r.odd_s_per_t) t.add("odd term", format_with_error(*r.odd_s_per_t, r.odd_err_s_per_t, "S/T"));
    std::string flags;
    for (fit::Flag f : r.flags) flags += (flags.empty() ? "" : ", ") + std::string(fit::flag_name(f));
    t.add("flags", flags.empty() ? "none" : flags);
  } else {
    t.add("L_phi", "none: " + r.error);
  }
  t.add("usable", std::string(a.usable ? "yes" : "no") + " for L_phi(T)");
  for (const sweep::Reason& reason : a.reasons) t.add(reason.name, reason.sentence);
  if (!a.advice.empty()) t.add("advice", a.advice);
  t.print(out);
}

}  // namespace

int run_fit(const FitRequest& rq, std::ostream& out, std::ostream& err) {
  auto fail = [&err](const std::string& message) {
    err << "lphi fit: " << message << '\n';
    return exit_bad_input;
  };

  const auto model = model_from_cli_name(rq.model);
  if (!model) {
    return fail("unknown model '" + rq.model + "' (choose " + cli_model_list + ")");
  }

  for (const std::string& problem :
       {check_positive("--squares", rq.squares), check_positive("--current", rq.current_a),
        check_positive("--gain", rq.gain), check_positive("--width-m", rq.width_m),
        check_positive("--thickness-m", rq.thickness_m),
        check_positive("--mean-free-path-m", rq.mean_free_path_m),
        check_positive("--window-t", rq.window_t), check_finite("--alpha-fixed", rq.alpha_fixed)}) {
    if (!problem.empty()) return fail(problem);
  }
  if (*model == mc::Model::wire1d && !rq.width_m) {
    return fail("--model wire1d needs --width-m (the wire's width)");
  }
  if (*model == mc::Model::kawabata3d && !rq.thickness_m) {
    return fail("--model kawabata3d needs --thickness-m (the film's thickness)");
  }
  if (rq.alpha_fixed && *model != mc::Model::hln2d) {
    return fail("--alpha-fixed applies only to --model hln2d");
  }
  if (rq.spin_orbit && *model != mc::Model::wire1d) {
    return fail("--spin-orbit applies only to --model wire1d (hln2d-so always fits L_so)");
  }

  FitOutcome o;
  o.source = input_display_name(rq.input_path);
  std::string text;
  if (auto s = read_text_input(rq.input_path, text); !s.ok()) return fail(s.message());
  CsvTable table;
  if (auto s = CsvTable::parse(text, o.source, table); !s.ok()) return fail(s.message());
  o.rows = table.row_count();
  ColumnMap columns;
  for (const auto& m : rq.columns) {
    if (auto s = columns.add(m, fit_columns(), "a sweep table"); !s.ok()) return fail(s.message());
  }

  if (!rq.input_column.empty()) {
    const auto chosen = signal_from_name(rq.input_column);
    if (!chosen) {
      return fail("unknown --input-column '" + rq.input_column +
                  "' (choose rsq_ohm, r_ohm or lockin_x_v)");
    }
    o.signal = *chosen;
  } else if (has_mapped_column(table, columns, "rsq_ohm")) {
    o.signal = Signal::rsq;
  } else if (has_mapped_column(table, columns, "r_ohm")) {
    o.signal = Signal::resistance;
  } else if (has_mapped_column(table, columns, "lockin_x_v")) {
    o.signal = Signal::lockin;
  } else {
    return fail(o.source +
                ": missing a signal column: the sweep needs one of rsq_ohm, r_ohm "
                "(with --squares) or lockin_x_v (with --current and --squares); map the file's "
                "own with --column, e.g. rsq_ohm=R:kohm" +
                text::CsvReader::delimiter_note(table.header()));
  }
  const std::string signal_column(column_name(o.signal));
  if (o.signal != Signal::rsq && !rq.squares) {
    return fail("column '" + signal_column +
                "' needs --squares (L/W between the voltage probes) to give R_sq");
  }
  if (o.signal == Signal::lockin && !rq.current_a) {
    return fail("column 'lockin_x_v' needs --current (the rms excitation current in A)");
  }
  if ((rq.gain || rq.current_a) && o.signal != Signal::lockin) {
    return fail("--current and --gain apply only to the lockin_x_v column (this fit reads '" +
                signal_column + "'; choose the column with --input-column)");
  }

  std::vector<double> field_t, signal;
  if (auto s = read_si_column(table, columns, "field_t", field_t); !s.ok()) return fail(s.message());
  if (auto s = read_si_column(table, columns, signal_column, signal); !s.ok()) return fail(s.message());
  if (table.row_count() == 0) return fail(o.source + ": no data rows below the header");
  if (auto s = check_sweep_units(table, columns, field_t, signal_column, signal,
                                 o.signal == Signal::resistance ? *rq.squares : 1.0, err); !s.ok()) {
    return fail(s.message());
  }

  std::vector<conductance::FieldPoint> points;
  points.reserve(signal.size());
  for (std::size_t i = 0; i < signal.size(); ++i) {
    if (!(signal[i] > 0.0)) {
      return fail(where_mapped(table, columns, i, signal_column) + ": must be positive, got " +
                  format_number(signal[i], 6));
    }
    double rsq = signal[i];
    if (o.signal == Signal::lockin) {
      rsq = conductance::resistance_ohm(signal[i], *rq.current_a, rq.gain.value_or(1.0));
    }
    if (o.signal != Signal::rsq) rsq = conductance::sheet_resistance_ohm(rsq, *rq.squares);
    if (!std::isfinite(rsq) || !(rsq > 0.0)) {
      return fail(where_mapped(table, columns, i, signal_column) + ": gives a sheet resistance of " +
                  format_number(rsq, 6) + " ohm, not a usable value");
    }
    points.push_back({field_t[i], rsq});
  }

  // One-sided sweeps wait for the fit's odd-in-B term (the analysis has the
  // path, sweep::Options::allow_one_sided); until then they are refused here.
  const auto [lowest, highest] = std::minmax_element(field_t.begin(), field_t.end());
  if (!(*lowest < 0.0 && *highest > 0.0)) {
    return fail(o.source + " column " + columns.describe("field_t") + ": the sweep never crosses zero field (B from " +
                format_number(*lowest, 6) + " to " + format_number(*highest, 6) +
                " T); lphi needs both signs of B to symmetrize");
  }

  // Optional columns: the time of each reading and the lock-in's time constant.
  std::vector<double> time_s, time_constant_s;
  if (has_mapped_column(table, columns, "t_s")) {
    if (auto s = read_si_column(table, columns, "t_s", time_s); !s.ok()) return fail(s.message());
  }
  if (has_mapped_column(table, columns, "time_constant_s")) {
    if (auto s = read_si_column(table, columns, "time_constant_s", time_constant_s); !s.ok())
      return fail(s.message());
  }
  std::vector<sweep::Reading> readings;
  readings.reserve(points.size());
  for (std::size_t i = 0; i < points.size(); ++i) {
    sweep::Reading reading;
    reading.field_t = points[i].field_t;
    reading.rsq_ohm = points[i].value;
    if (!time_s.empty()) reading.t_s = time_s[i];
    if (!time_constant_s.empty()) reading.time_constant_s = time_constant_s[i];
    readings.push_back(reading);
  }
  // An up-then-down table is two legs; the analysis takes the first two.
  std::vector<std::vector<sweep::Reading>> legs = sweep::split_at_reversals(readings);
  o.legs_found = legs.size();
  if (legs.size() > 2) legs.resize(2);
  for (const auto& leg : legs) o.leg_rows.push_back(leg.size());

  sweep::Options options;
  options.fit.model = *model;
  options.fit.geometry.squares = rq.squares.value_or(0.0);
  options.fit.geometry.width_m = rq.width_m.value_or(0.0);
  options.fit.geometry.thickness_m = rq.thickness_m.value_or(0.0);
  options.fit.geometry.mean_free_path_m = rq.mean_free_path_m.value_or(0.0);
  options.fit.alpha_fixed = rq.alpha_fixed;
  options.fit.fit_offset = !rq.no_offset;
  options.fit.fit_background = rq.background;
  options.fit.wire_spin_orbit = rq.spin_orbit;
  options.fit.window_t = rq.window_t;
  o.analysis = sweep::analyze(legs, options);
  const sweep::Analysis& a = o.analysis;
  if (!a.ok) return fail(o.source + ": " + a.error);
  if (a.has("not-prepared")) return fail(o.source + ": " + a.fit.error);
  if (a.has("too-few-near-zero")) return fail(o.source + ": " + a.coverage.sentence);

  if (rq.json) {
    out << to_json(o).dump(2) << '\n';
  } else {
    print_human(o, out);
  }
  // A sweep without a fit (flat, a hole across zero field) or whose fit
  // failed ran but gave no length: the fit's failure code.
  return a.fit.ok ? exit_ok : exit_failure;
}

void register_fit_command(CLI::App& app, int* exit_code) {
  auto rq = std::make_shared<FitRequest>();
  CLI::App* sub = app.add_subcommand(
      "fit",
      "Fit one magnetoconductance sweep (CSV with field_t and rsq_ohm, r_ohm or lockin_x_v) "
      "and print L_phi");
  sub->add_option("SWEEP.csv", rq->input_path, "the sweep table; - reads standard input")
      ->required();
  sub->add_option("--model", rq->model, std::string("the model: ") + cli_model_list)
      ->capture_default_str();
  sub->add_option("--input-column", rq->input_column,
                  "the signal column to use when the table has several "
                  "(default: rsq_ohm, else r_ohm, else lockin_x_v)");
  sub->add_option("--column", rq->columns, column_option_help(fit_columns()));
  add_optional(sub, "--squares", rq->squares,
               "number of squares L/W between the voltage probes (needed for r_ohm, lockin_x_v)");
  add_optional(sub, "--current", rq->current_a, "rms excitation current in A (for lockin_x_v)");
  add_optional(sub, "--gain", rq->gain, "voltage preamplifier gain (for lockin_x_v; default 1)");
  add_optional(sub, "--width-m", rq->width_m, "sample width in m (required by wire1d)");
  add_optional(sub, "--thickness-m", rq->thickness_m,
               "film thickness in m (required by kawabata3d)");
  add_optional(sub, "--mean-free-path-m", rq->mean_free_path_m,
               "elastic mean free path in m: caps the window at the diffusive limit");
  add_optional(sub, "--alpha-fixed", rq->alpha_fixed, "hold alpha at this value (hln2d)");
  add_optional(sub, "--window-t", rq->window_t,
               "fit |B| <= this field in T instead of the automatic window");
  sub->add_flag("--background", rq->background, "also fit a classical c*B^2 background");
  sub->add_flag("--no-offset", rq->no_offset, "do not fit a constant offset in Delta sigma");
  sub->add_flag("--spin-orbit", rq->spin_orbit, "wire1d: also fit the spin-orbit length L_so");
  sub->add_flag("--json", rq->json, "print one JSON object instead of a table");
  sub->callback([rq, exit_code] { *exit_code = run_fit(*rq, std::cout, std::cerr); });
}

}  // namespace lphi::client
