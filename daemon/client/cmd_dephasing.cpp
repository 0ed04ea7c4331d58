// lphi dephasing: L_phi(T) from a CSV table to the power law, the saturation
// term and the verdict (dephasing.hpp).

#include <cmath>
#include <iostream>
#include <memory>
#include <utility>
#include <vector>

#include <nlohmann/json.hpp>

#include "analysis/dephasing.hpp"
#include "daemon/client/column_map.hpp"
#include "daemon/client/commands.hpp"
#include "daemon/client/csv_table.hpp"
#include "daemon/client/exit_codes.hpp"
#include "daemon/client/format.hpp"
#include "daemon/client/options.hpp"
#include "daemon/client/table_checks.hpp"
#include "schema/result_json.hpp"

namespace lphi::client {
namespace {

std::string state_sentence(dephasing::State s) {
  switch (s) {
    case dephasing::State::insufficient_data:
      return "insufficient data: too few temperatures, or too narrow a range, to judge";
    case dephasing::State::power_law:
      return "power law: no significant saturation term";
    case dephasing::State::saturating:
      return "saturating: a saturation term is significant, but the data stop near T_sat";
    case dephasing::State::saturated:
      return "saturated: L_phi levels off below T_sat";
  }
  return "unknown";
}

// The keys lphid's verdict also carries (schema/result_json.hpp), plus
// the input file.
nlohmann::json to_json(const dephasing::DephasingResult& r, const std::string& source) {
  nlohmann::json j = schema::dephasing_json(r);
  j["input"] = source;
  return j;
}

void print_human(const dephasing::DephasingResult& r, const std::string& source,
                 std::ostream& out) {
  out << "lphi dephasing: " << source << " (" << r.n_points << " temperatures)\n";
  Table t({}, 2);
  t.add("state", state_sentence(r.state));
  if (r.exponent_p) t.add("exponent p", format_with_error(*r.exponent_p, r.exponent_p_err, ""));
  if (r.prefactor_b) {
    t.add("prefactor b", format_with_error(*r.prefactor_b, r.prefactor_b_err, "m^-2 K^-p"));
  }
  if (r.lphi_sat_m) t.add("L_sat", format_length(*r.lphi_sat_m, r.lphi_sat_err_m));
  if (r.t_sat_k) t.add("T_sat", format_temperature_mk(*r.t_sat_k, r.t_sat_err_k));
  if (r.state != dephasing::State::insufficient_data) {
    t.add("F-test p-value", format_number(r.p_value, 3) + "  (saturation vs. pure power law)");
    t.add("pure power law",
          "p = " + format_with_error(r.power_law.p, r.power_law.p_err, "") +
              ", chi2 = " + format_number(r.power_law.chi2, 4));
    t.add("chi2 saturating", format_number(r.chi2_saturating, 4));
  }
  if (r.aak_ratio) t.add("fitted / AAK", format_with_error(*r.aak_ratio, r.aak_ratio_err, ""));
  if (r.aak_rate_per_s_at_1k) {
    t.add("AAK rate at 1 K", format_number(*r.aak_rate_per_s_at_1k, 3) + " s^-1");
  }
  if (!r.converged && r.state != dephasing::State::insufficient_data) {
    t.add("converged", "NO");
  }
  if (r.errors_from_scatter) t.add("errors", "from the scatter (no lphi_err_m given)");
  for (const auto& note : r.notes) t.add("note", note);
  t.print(out);
}

}  // namespace

int run_dephasing(const DephasingRequest& rq, std::ostream& out, std::ostream& err) {
  auto fail = [&err](const std::string& message) {
    err << "lphi dephasing: " << message << '\n';
    return exit_bad_input;
  };
  if (rq.dimension < 1 || rq.dimension > 3) {
    return fail("--dimension must be 1, 2 or 3, got " + std::to_string(rq.dimension));
  }
  for (const std::string& problem :
       {check_positive("--diffusion-m2s", rq.diffusion_m2s), check_positive("--rsq-ohm", rq.rsq_ohm),
        check_positive("--resistance-per-length-ohm-m", rq.resistance_per_length_ohm_m)}) {
    if (!problem.empty()) return fail(problem);
  }

  const std::string source = input_display_name(rq.input_path);
  std::string text;
  if (auto s = read_text_input(rq.input_path, text); !s.ok()) return fail(s.message());
  CsvTable table;
  if (auto s = CsvTable::parse(text, source, table); !s.ok()) return fail(s.message());
  ColumnMap columns;
  for (const auto& m : rq.columns) {
    if (auto s = columns.add(m, dephasing_columns(), "an L_phi(T) table"); !s.ok()) {
      return fail(s.message());
    }
  }

  std::vector<double> temperature_k, lphi_m, lphi_err_m;
  for (auto [name, values] : {std::pair{"temperature_k", &temperature_k}, std::pair{"lphi_m", &lphi_m},
                              std::pair{"lphi_err_m", &lphi_err_m}}) {
    if (auto s = read_si_column(table, columns, name, *values); !s.ok()) return fail(s.message());
  }
  if (auto s = check_dephasing_units(table, columns, temperature_k, lphi_m, lphi_err_m); !s.ok()) {
    return fail(s.message());
  }

  dephasing::DephasingOptions options;
  options.dimension = rq.dimension;
  options.diffusion_m2s = rq.diffusion_m2s;
  options.sheet_resistance_ohm = rq.rsq_ohm;
  options.resistance_per_length_ohm_m = rq.resistance_per_length_ohm_m;

  std::vector<dephasing::LphiPoint> points;
  for (std::size_t i = 0; i < table.row_count(); ++i) {
    if (!(temperature_k[i] > 0.0)) {
      return fail(where_mapped(table, columns, i, "temperature_k") + ": a temperature must be positive, got " +
                  format_number(temperature_k[i], 6) + " K");
    }
    if (!(lphi_m[i] > 0.0)) {
      return fail(where_mapped(table, columns, i, "lphi_m") + ": L_phi must be positive, got " +
                  format_number(lphi_m[i], 6) + " m");
    }
    if (lphi_err_m[i] < 0.0) {
      return fail(where_mapped(table, columns, i, "lphi_err_m") + ": an error must not be negative, got " +
                  format_number(lphi_err_m[i], 6) + " m");
    }
    points.push_back({temperature_k[i], lphi_m[i], lphi_err_m[i]});
  }
  if (points.size() < options.min_points) {
    return fail(source + ": too few points: " + std::to_string(points.size()) +
                " temperatures, the fit needs at least " + std::to_string(options.min_points));
  }

  const auto result = dephasing::fit_dephasing(points, options);
  if (!result.error.empty()) return fail(source + ": " + result.error);
  if (rq.json) {
    out << to_json(result, source).dump(2) << '\n';
  } else {
    print_human(result, source, out);
  }
  return exit_ok;
}

void register_dephasing_command(CLI::App& app, int* exit_code) {
  auto rq = std::make_shared<DephasingRequest>();
  CLI::App* sub = app.add_subcommand(
      "dephasing",
      "Fit L_phi(T) (CSV with temperature_k, lphi_m, lphi_err_m) with a power law plus "
      "saturation and give the saturation verdict");
  sub->add_option("TABLE.csv", rq->input_path, "the L_phi(T) table; - reads standard input")
      ->required();
  sub->add_option("--dimension", rq->dimension,
                  "1, 2 or 3: the sample's dimensionality for the expected exponent")
      ->capture_default_str();
  add_optional(sub, "--diffusion-m2s", rq->diffusion_m2s,
               "diffusion constant D in m^2/s (for the AAK comparison)");
  add_optional(sub, "--rsq-ohm", rq->rsq_ohm, "sheet resistance in ohm (2D AAK comparison)");
  add_optional(sub, "--resistance-per-length-ohm-m", rq->resistance_per_length_ohm_m,
               "resistance per length in ohm/m (1D AAK comparison)");
  sub->add_option("--column", rq->columns, column_option_help(dephasing_columns()));
  sub->add_flag("--json", rq->json, "print one JSON object instead of a table");
  sub->callback([rq, exit_code] { *exit_code = run_dephasing(*rq, std::cout, std::cerr); });
}

}  // namespace lphi::client
