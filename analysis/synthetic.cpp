#include "analysis/synthetic.hpp"

#include <cmath>

#include "analysis/constants.hpp"

namespace lphi::synthetic {
namespace {

std::uint64_t splitmix64(std::uint64_t& state) {
  state += 0x9E3779B97F4A7C15ULL;
  std::uint64_t z = state;
  z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ULL;
  z = (z ^ (z >> 27)) * 0x94D049BB133111EBULL;
  return z ^ (z >> 31);
}

// The top 53 bits as a double in (0, 1]: never 0, so the logarithm in
// Box-Muller is always finite.
double uniform_open_closed(std::uint64_t& state) {
  constexpr double kTwoToMinus53 = 1.0 / 9007199254740992.0;
  return static_cast<double>((splitmix64(state) >> 11) + 1) * kTwoToMinus53;
}

bool positive(double x) { return std::isfinite(x) && x > 0.0; }

bool truth_usable(const SweepTruth& t) {
  if (!positive(t.lphi_m) || !positive(t.rsq0_ohm) || !std::isfinite(t.background_s_per_t2))
    return false;
  switch (t.model) {
    case mc::Model::hln2d:
      return std::isfinite(t.alpha);
    case mc::Model::hln2d_so:
      return positive(t.lso_m);
    case mc::Model::wire1d:
      return positive(t.width_m) && std::isfinite(t.lso_m) && t.lso_m >= 0;
    case mc::Model::kawabata3d:
      return positive(t.thickness_m);
  }
  return false;
}

// Delta sigma_sq in units of e^2/(pi h).
double model_value(const SweepTruth& t, double field_t) {
  switch (t.model) {
    case mc::Model::hln2d:
      return mc::hln2d(field_t, t.alpha, t.lphi_m);
    case mc::Model::hln2d_so:
      return mc::hln2d_so(field_t, t.lphi_m, t.lso_m);
    case mc::Model::wire1d:
      return t.lso_m > 0 ? mc::wire1d_so(field_t, t.lphi_m, t.lso_m, t.width_m)
                         : mc::wire1d(field_t, t.lphi_m, t.width_m);
    case mc::Model::kawabata3d:
      return mc::kawabata3d(field_t, t.lphi_m, t.thickness_m);
  }
  return 0.0;
}

}  // namespace

NormalSource::NormalSource(std::uint64_t seed) : state_(seed) {}

double NormalSource::next() {
  if (has_spare_) {
    has_spare_ = false;
    return spare_;
  }
  const double u1 = uniform_open_closed(state_);
  const double u2 = uniform_open_closed(state_);
  const double radius = std::sqrt(-2.0 * std::log(u1));
  const double angle = 2.0 * si::pi * u2;
  spare_ = radius * std::sin(angle);
  has_spare_ = true;
  return radius * std::cos(angle);
}

std::vector<SyntheticPoint> make_sweep(const SweepTruth& truth, const SweepPlan& plan) {
  if (!truth_usable(truth) || !positive(plan.max_field_t) || !std::isfinite(plan.noise_rsq_ohm) ||
      plan.noise_rsq_ohm < 0)
    return {};
  std::vector<SyntheticPoint> sweep;
  sweep.reserve(plan.n_points);
  NormalSource noise(plan.seed);
  const double sigma0_s = 1.0 / truth.rsq0_ohm;
  const double last = plan.n_points > 1 ? static_cast<double>(plan.n_points - 1) : 1.0;
  for (std::size_t i = 0; i < plan.n_points; ++i) {
    const double field_t =
        plan.n_points == 1 ? 0.0 : plan.max_field_t * (2.0 * static_cast<double>(i) - last) / last;
    const double sigma_s = sigma0_s + model_value(truth, field_t) * si::wl_conductance_s +
                           truth.background_s_per_t2 * field_t * field_t;
    sweep.push_back({field_t, 1.0 / sigma_s + plan.noise_rsq_ohm * noise.next()});
  }
  return sweep;
}

}  // namespace lphi::synthetic
