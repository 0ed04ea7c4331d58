// Which sweep fits enter L_phi(T) (fit_admission.hpp).
#include "daemon/live/fit_admission.hpp"

#include <algorithm>
#include <cmath>
#include <string>

#include <fmt/format.h>

#include "analysis/temperature_drift.hpp"

namespace lphi::live {
namespace {

std::optional<double> number_in(const nlohmann::json& j, const char* key) {
  if (!j.is_object()) return std::nullopt;
  const auto it = j.find(key);
  if (it == j.end() || !it->is_number()) return std::nullopt;
  const double v = it->get<double>();
  return std::isfinite(v) ? std::optional<double>(v) : std::nullopt;
}

constexpr double kPlateauZ = 3.0;
constexpr double kSameTemperature = 0.01;

}  // namespace

double expected_lphi_exponent(int dimension) {
  switch (dimension) {
    case 1: return 1.0 / 3.0;
    case 3: return 0.75;
    default: return 0.5;
  }
}

double drift_exponent(int dimension, std::optional<double> fitted_p) {
  double s = expected_lphi_exponent(dimension);
  if (fitted_p && std::isfinite(*fitted_p) && *fitted_p > 0.0 && *fitted_p <= 4.0)
    s = std::max(s, *fitted_p / 2.0);
  return s;
}

double scaled_lphi_error_m(const FitRecord& fit) {
  const double scale = number_in(fit.result, "error_scale").value_or(1.0);
  return fit.lphi_err_m * std::max(1.0, scale);
}

void judge_temperature(FitRecord& fit, const std::vector<const segment::Sweep*>& sweeps,
                       double exponent_s, bool decide) {
  const auto window = number_in(fit.result, "field_window_t");
  const double error = scaled_lphi_error_m(fit);
  const bool judgeable = fit.ok && window && *window > 0.0 && std::isfinite(fit.lphi_m) &&
                         fit.lphi_m > 0.0 && std::isfinite(error) && error > 0.0;
  drift::DriftJudgement j;
  if (judgeable) {
    std::vector<drift::DriftPoint> points;
    for (const auto* s : sweeps)
      for (const auto& p : s->points) points.push_back({p.t_s, p.temperature_k, p.field_t});
    std::stable_sort(points.begin(), points.end(),
                     [](const drift::DriftPoint& a, const drift::DriftPoint& b) { return a.t_s < b.t_s; });
    j = drift::judge(points, number_in(fit.result, "field_offset_t").value_or(0.0), *window,
                     error / fit.lphi_m, exponent_s);
  }
  const bool judged = judgeable && j.error.empty();
  if (judged) fit.temperature_k = j.temperature_k;
  if (!decide) return;
  if (!judged) {
    if (fit.temperature_unstable) {
      fit.used_in_dephasing = false;
      fit.quality.emplace_back("temperature-unstable");
    }
    return;
  }
  fit.result["temperature_eff_k"] = j.temperature_k;
  fit.result["temperature_drift_k"] = j.drift_k;
  fit.result["temperature_drift_effect"] = j.effect_rel;
  fit.result["temperature_note"] = j.sentence;
  if (!j.usable) {
    fit.used_in_dephasing = false;
    fit.quality.push_back(j.reason + ": " + j.sentence);
  } else if (!j.sentence.empty()) {
    fit.quality.push_back("temperature-drift-within-error: " + j.sentence);
  }
}

void compare_with_plateau(FitRecord& fit, const std::vector<FitRecord>& earlier, double exponent_s) {
  if (!fit.used_in_dephasing || !(fit.temperature_k > 0.0)) return;
  double sum_w = 0.0, sum_wl = 0.0;
  std::size_t n = 0;
  for (const FitRecord& e : earlier) {
    if (e.cooldown != fit.cooldown || !e.used_in_dephasing || !(e.temperature_k > 0.0)) continue;
    const bool same_run = e.temperature_run == fit.temperature_run;
    const bool close = std::abs(e.temperature_k - fit.temperature_k) <= kSameTemperature * fit.temperature_k;
    if (!same_run && !close) continue;
    // L ~ T^(-s): moved to this fit's temperature.
    const double moved = std::pow(e.temperature_k / fit.temperature_k, exponent_s);
    const double l = e.lphi_m * moved, err = scaled_lphi_error_m(e) * moved;
    if (!(err > 0.0) || !std::isfinite(l)) continue;
    sum_w += 1.0 / (err * err);
    sum_wl += l / (err * err);
    ++n;
  }
  if (n == 0) return;
  const double mean = sum_wl / sum_w, mean_err = std::sqrt(1.0 / sum_w);
  const double err = scaled_lphi_error_m(fit);
  const double z = (fit.lphi_m - mean) / std::sqrt(err * err + mean_err * mean_err);
  fit.result["plateau_z"] = z;
  if (!(std::abs(z) > kPlateauZ)) return;
  const bool exclude = n >= 2;
  fit.quality.push_back(fmt::format(
      "disagrees-with-plateau: L_phi = {:.4g} +/- {:.2g} nm where the plateau's other {} sweep{} "
      "give {:.4g} +/- {:.2g} nm (z = {:.1f}){}",
      fit.lphi_m * 1e9, err * 1e9, n, n == 1 ? "" : "s", mean * 1e9, mean_err * 1e9, z,
      exclude ? "; left out of L_phi(T)" : "; kept: with one other sweep lphi cannot tell which is off"));
  if (exclude) fit.used_in_dephasing = false;
}

}  // namespace lphi::live
