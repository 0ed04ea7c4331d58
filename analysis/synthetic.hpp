// Synthetic data from lphi's own forward models, for the demo, the tests and
// the simulator. Deterministic for a given seed: normally distributed noise
// comes from a splitmix64 engine and a fixed, portable transform (not from
// <random>'s distributions, whose output differs between standard libraries).
#pragma once

#include <cstdint>
#include <vector>

#include "analysis/magnetoconductance.hpp"

namespace lphi::synthetic {

struct SweepTruth {
  mc::Model model = mc::Model::hln2d;
  double lphi_m = 200e-9;
  double alpha = 1.0;       // hln2d
  double lso_m = 0.0;       // hln2d_so, wire1d (0: none)
  double width_m = 0.0;     // wire1d
  double thickness_m = 0.0; // kawabata3d
  double rsq0_ohm = 1000.0; // sheet resistance at zero field
  double background_s_per_t2 = 0.0;
};

struct SweepPlan {
  double max_field_t = 0.1;
  std::size_t n_points = 401;       // from -max to +max, evenly spaced
  double noise_rsq_ohm = 0.0;       // Gaussian noise on R_sq, rms
  std::uint64_t seed = 1;
};

struct SyntheticPoint {
  double field_t = 0.0;
  double rsq_ohm = 0.0;
};

// R_sq(B) = 1 / (1/rsq0 + Delta sigma(B) + background B^2) + noise, with
// Delta sigma in siemens from the model named by truth.model (wire1d uses the
// spin-orbit form when lso_m > 0). Fields are B_i = max (2i - (n-1))/(n-1),
// exactly antisymmetric about zero; n = 1 gives the single field 0.
// Returns an empty vector when the truth or the plan is unusable (a length
// <= 0 that the model needs, rsq0 <= 0, a non-finite or negative setting).
std::vector<SyntheticPoint> make_sweep(const SweepTruth& truth, const SweepPlan& plan);

// Portable standard normal from a 64-bit engine (Box-Muller on 53-bit
// uniforms), so data are identical across standard libraries.
// splitmix64: S. Vigna's finalizer of Steele, Lea and Flood's SplitMix
// (OOPSLA 2014); Box-Muller: Ann. Math. Statist. 29, 610 (1958).
class NormalSource {
 public:
  explicit NormalSource(std::uint64_t seed);
  double next();
 private:
  std::uint64_t state_;
  bool has_spare_ = false;
  double spare_ = 0.0;
};

}  // namespace lphi::synthetic
