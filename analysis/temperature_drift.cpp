// Judging a sweep's temperature drift by its effect on L_phi
// (analysis/temperature_drift.hpp).
#include "analysis/temperature_drift.hpp"

#include <algorithm>
#include <cmath>
#include <vector>

#include <fmt/format.h>

namespace lphi::drift {
namespace {

constexpr std::size_t kBins = 16;
// An effect on L_phi below this fraction is negligible whatever the fit's
// own error (lphi's choice: a sweep with a 0.003 % error is not left out
// for a 0.004 % drift; L_phi(T) is not read to better than this).
constexpr double kNegligibleEffect = 0.005;
// A usable sweep's drift is stated when it is at least this fraction of T.
constexpr double kStatedDrift = 0.005;

DriftJudgement refused(std::string why) {
  DriftJudgement j;
  j.error = std::move(why);
  return j;
}

}  // namespace

DriftJudgement judge(std::span<const DriftPoint> points, double field_centre_t, double window_t,
                     double lphi_rel_err, double exponent_s, const DriftOptions& options) {
  if (!std::isfinite(field_centre_t)) return refused("the field centre is not finite");
  if (!(window_t > 0.0) || !std::isfinite(window_t)) return refused("the field window must be > 0");
  if (!(lphi_rel_err > 0.0) || !std::isfinite(lphi_rel_err))
    return refused("the relative error of L_phi must be finite and > 0");
  if (!(exponent_s >= 0.0) || !std::isfinite(exponent_s))
    return refused("the exponent s must be finite and >= 0");
  if (!(options.max_ramp_fraction > 0.0)) return refused("max_ramp_fraction must be > 0");

  std::vector<DriftPoint> in;
  for (const DriftPoint& p : points) {
    if (!std::isfinite(p.t_s) || !std::isfinite(p.temperature_k) || !std::isfinite(p.field_t))
      return refused("a point has a non-finite time, temperature or field");
    if (!(p.temperature_k > 0.0)) return refused("a point has a temperature <= 0 K");
    if (std::abs(p.field_t - field_centre_t) <= window_t) in.push_back(p);
  }
  if (in.size() < 3) return refused("fewer than 3 points inside the field window");

  DriftJudgement j;
  j.n_points = in.size();
  j.exponent_s = exponent_s;
  j.lphi_rel_err = lphi_rel_err;

  // The least-squares line T = a + b (t - t_mean). The means are summed as
  // differences from the first point, so that a constant temperature has
  // exactly its own value as the mean.
  const double n = static_cast<double>(in.size());
  double t_mean = 0.0, temp_mean = 0.0;
  for (const DriftPoint& p : in) {
    t_mean += p.t_s - in.front().t_s;
    temp_mean += p.temperature_k - in.front().temperature_k;
  }
  t_mean = in.front().t_s + t_mean / n;
  temp_mean = in.front().temperature_k + temp_mean / n;
  double stt = 0.0, sty = 0.0;
  for (const DriftPoint& p : in) {
    stt += (p.t_s - t_mean) * (p.t_s - t_mean);
    sty += (p.t_s - t_mean) * (p.temperature_k - temp_mean);
  }
  const double slope = stt > 0.0 ? sty / stt : 0.0;
  const double t_first = in.front().t_s, t_last = in.back().t_s;
  j.temperature_k = temp_mean;
  j.drift_k = slope * (t_last - t_first);

  // Excess scatter about the line, from equal time bins.
  if (t_last > t_first && in.size() >= 2 * kBins) {
    std::vector<double> sum(kBins, 0.0), sum2(kBins, 0.0);
    std::vector<std::size_t> count(kBins, 0);
    for (const DriftPoint& p : in) {
      const double r = p.temperature_k - (temp_mean + slope * (p.t_s - t_mean));
      auto k = static_cast<std::size_t>((p.t_s - t_first) / (t_last - t_first) * kBins);
      k = std::min(k, kBins - 1);
      sum[k] += r;
      sum2[k] += r * r;
      ++count[k];
    }
    double between = 0.0, within = 0.0, points_in_bins = 0.0;
    std::size_t bins = 0, within_dof = 0;
    for (std::size_t k = 0; k < kBins; ++k) {
      if (count[k] < 2) continue;
      const double c = static_cast<double>(count[k]);
      const double mean = sum[k] / c;
      between += mean * mean;
      within += sum2[k] - c * mean * mean;
      within_dof += count[k] - 1;
      points_in_bins += c;
      ++bins;
    }
    if (bins >= 2 && within_dof > 0) {
      const double s_b2 = between / static_cast<double>(bins);
      const double s_w2 = within / static_cast<double>(within_dof);
      const double m = points_in_bins / static_cast<double>(bins);
      j.excess_k = std::sqrt(std::max(0.0, s_b2 - s_w2 / m));
    }
  }

  const double s = exponent_s;
  const double a = j.drift_k / (2.0 * j.temperature_k);
  j.effect_rel = s * (s + 1.0) / 2.0 * a * a / 3.0 + s * j.excess_k / j.temperature_k;
  const double ramp = std::abs(j.drift_k) / j.temperature_k;
  if (ramp > options.max_ramp_fraction) {
    j.reason = "temperature-ramp";
    j.sentence = fmt::format(
        "the temperature changed by {:.1f} % over the points that determine L_phi ({:.4g} K "
        "around {:.4g} K), more than {:.0f} %: a ramp, during which the thermometer and the "
        "electrons need not agree",
        100.0 * ramp, j.drift_k, j.temperature_k, 100.0 * options.max_ramp_fraction);
  } else if (j.effect_rel > std::max(lphi_rel_err, kNegligibleEffect)) {
    j.reason = "temperature-drift";
    j.sentence = fmt::format(
        "the temperature drifted by {:.1f} % (and strayed {:.2g} K from a straight line) over the "
        "points that determine L_phi: it moves L_phi by about {:.2g} %, more than its error of "
        "{:.2g} %",
        100.0 * ramp, j.excess_k, 100.0 * j.effect_rel, 100.0 * lphi_rel_err);
  } else {
    j.usable = true;
    if (ramp >= kStatedDrift || j.excess_k >= kStatedDrift * j.temperature_k)
      j.sentence = fmt::format(
          "the temperature drifted by {:.1f} % over the points that determine L_phi; L_phi is "
          "used at their mean temperature {:.4g} K (the drift moves it by about {:.2g} %, within "
          "its error of {:.2g} %)",
          100.0 * ramp, j.temperature_k, 100.0 * j.effect_rel, 100.0 * lphi_rel_err);
  }
  return j;
}

}  // namespace lphi::drift
