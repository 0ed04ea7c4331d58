// The synthetic cooldown shared by the segmenter tests (segmenter_test.cpp,
// segmenter_settling_test.cpp): its constants, a Cooldown description, the
// points it gives, the options the tests segment it with, and a helper that
// pushes points through a SweepSegmenter in chunks of a given size.
//
// The cooldown: plateaus at 1 K, 500, 200, 100 and 50 mK; at each, the
// magnet dwells at -0.1 T, ramps to +0.1 T, dwells, ramps back (the usual
// up/down pair per temperature, common practice). Readings at 25 Hz, lock-in
// time constant 0.3 s. Thermometer noise 2e-4 relative and field noise 1e-5 T
// (Gaussian, lphi::synthetic::NormalSource), far below the criteria used
// (2% spread; 1 mT reversal tolerance).
//
// Pure functions of their arguments (the noise is seeded): safe anywhere.
#pragma once

#include <algorithm>
#include <cmath>
#include <cstddef>
#include <cstdint>
#include <span>
#include <vector>

#include "analysis/segmenter.hpp"
#include "analysis/synthetic.hpp"

namespace lphi::segment::testing {

using lphi::align::AlignedPoint;
using lphi::segment::Direction;
using lphi::segment::Plateau;
using lphi::segment::PlateauDetector;
using lphi::segment::PlateauOptions;
using lphi::segment::SegmenterOptions;
using lphi::segment::SegmentOutput;
using lphi::segment::SweepSegmenter;

inline constexpr double kDt = 0.04;   // s, 25 Hz
inline constexpr double kTau = 0.3;   // s; settling 5 tau = 1.5 s
inline constexpr double kBmax = 0.1;  // T

struct Cooldown {
  std::vector<double> temperatures_k = {1.0, 0.5, 0.2, 0.1, 0.05};
  double dwell_s = 20.0;
  double ramp_s = 120.0;
  double t_noise_rel = 2e-4;
  double b_noise_t = 1e-5;
  // Optional extra temperature step inside one ramp: plateau index, and the
  // factor applied from the middle of its up ramp on.
  int step_plateau = -1;
  double step_factor = 1.0;
  std::uint64_t seed = 5;
};

inline std::vector<AlignedPoint> make_cooldown(const Cooldown& c) {
  lphi::synthetic::NormalSource noise(c.seed);
  std::vector<AlignedPoint> out;
  const double cycle = 2.0 * (c.dwell_s + c.ramp_s);
  const auto n_per = static_cast<std::size_t>(std::llround(cycle / kDt));
  std::size_t i = 0;
  for (std::size_t k = 0; k < c.temperatures_k.size(); ++k) {
    for (std::size_t j = 0; j < n_per; ++j, ++i) {
      const double t = static_cast<double>(i) * kDt;
      const double u = static_cast<double>(j) * kDt;  // time within the cycle
      double b;
      if (u < c.dwell_s)
        b = -kBmax;
      else if (u < c.dwell_s + c.ramp_s)
        b = -kBmax + 2.0 * kBmax * (u - c.dwell_s) / c.ramp_s;
      else if (u < 2.0 * c.dwell_s + c.ramp_s)
        b = kBmax;
      else
        b = kBmax - 2.0 * kBmax * (u - 2.0 * c.dwell_s - c.ramp_s) / c.ramp_s;
      double temperature = c.temperatures_k[k];
      if (static_cast<int>(k) == c.step_plateau && u >= c.dwell_s + c.ramp_s / 2.0)
        temperature *= c.step_factor;
      AlignedPoint p;
      p.t_s = t;
      p.x_v = 1e-6;
      p.temperature_k = temperature * (1.0 + c.t_noise_rel * noise.next());
      p.field_t = b + c.b_noise_t * noise.next();
      p.range_v = 1e-5;
      p.time_constant_s = kTau;
      out.push_back(p);
    }
  }
  return out;
}

inline SegmenterOptions cooldown_options() {
  SegmenterOptions o;
  o.plateau.relative_spread = 0.02;
  o.plateau.min_duration_s = 200.0;
  o.min_span_t = 0.1;
  o.reversal_tolerance_t = 1e-3;
  return o;
}

inline SegmentOutput segment(const std::vector<AlignedPoint>& points, const SegmenterOptions& o,
                             std::size_t chunk, lphi::segment::SegmentCounts* counts = nullptr) {
  SweepSegmenter s(o);
  SegmentOutput out;
  for (std::size_t i = 0; i < points.size(); i += chunk) {
    const std::size_t n = std::min(chunk, points.size() - i);
    s.push(std::span<const AlignedPoint>(points).subspan(i, n), out);
  }
  s.finish(out);
  if (counts) *counts = s.counts();
  return out;
}

}  // namespace lphi::segment::testing
