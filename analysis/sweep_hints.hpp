// Model hints for one sweep fit: when the fitted model is probably the
// wrong one for the sample, say which one to use instead, with numbers.
//
// model_hints looks at a finished fit and its points and returns zero or
// more hints; it never changes the fit. Pure function of its arguments, no
// I/O, no state: safe from any thread. It may refit the sweep (with
// hln2d-so, to quote both fits' chi2), so it costs up to one more fit_sweep.
//
// The hints and their thresholds (analysis/PHYSICS.md, "Model hints"):
//   spin-orbit       (model hln2d) alpha within max(alpha_err, kAlphaNearHalf)
//                    of -1/2, the value strong spin-orbit scattering gives,
//                    or an antilocalization dip: the data, averaged in
//                    kHintBins bins of equal count over the window, fall
//                    from the lowest-field bin to a minimum more than
//                    kDipSigmas bin errors below it and rise again more
//                    than kDipSigmas errors above that minimum, while the
//                    hln2d curve is monotonic. Suggests hln2d-so, with the
//                    reduced chi-square against the sweep's own noise of the
//                    hln2d fit and of an hln2d-so refit of the same points.
//   wire-width       (a film model: hln2d, hln2d-so; width known) L_phi above
//                    width / kWidthFactor: the film is narrower than
//                    kWidthFactor L_phi, so the crossover to quasi-1D has
//                    begun. Suggests wire1d.
//   below-thickness  (hln2d, hln2d-so; thickness known) L_phi below the
//                    thickness: the film is 3D for dephasing. Suggests
//                    kawabata3d.
// A failed fit (ok false) gets no hints.
#pragma once

#include <optional>
#include <span>
#include <string>
#include <vector>

#include "analysis/conductance.hpp"
#include "analysis/magnetoconductance.hpp"
#include "analysis/sweep_fit.hpp"

namespace lphi::fit {

inline constexpr double kAlphaNearHalf = 0.2;
inline constexpr std::size_t kHintBins = 24;
inline constexpr double kDipSigmas = 3.0;
inline constexpr double kWidthFactor = 2.0;

struct ModelHint {
  std::string name;        // stable kebab-case: "spin-orbit", "wire-width", "below-thickness"
  mc::Model suggested = mc::Model::hln2d;
  std::string message;     // one sentence with the numbers
  // spin-orbit only: chi2_red against the sweep's own noise of the fit as
  // given and of the refit with the suggested model (empty when not formed).
  std::optional<double> chi2_red_fitted, chi2_red_suggested;
};

std::vector<ModelHint> model_hints(std::span<const conductance::DeltaSigmaPoint> points,
                                   const SweepFitResult& result, const SweepFitOptions& options,
                                   const SampleGeometry& geometry);

}  // namespace lphi::fit
