// Model hints (sweep_hints.hpp): antilocalization fitted with hln2d, films
// whose L_phi approaches the width or falls below the thickness. The data
// are lphi's forward models (analysis/magnetoconductance.hpp, checked
// against published values in tests/analysis/models) with Gaussian noise.
#include "analysis/sweep_hints.hpp"

#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <string>
#include <vector>

#include "analysis/conductance.hpp"
#include "analysis/constants.hpp"
#include "analysis/magnetoconductance.hpp"
#include "analysis/sweep_fit.hpp"
#include "analysis/synthetic.hpp"
#include "tests/analysis/fit/fit_test_names.hpp"

namespace {

const lf::ModelHint* find(const std::vector<lf::ModelHint>& hints, const std::string& name) {
  const auto it = std::find_if(hints.begin(), hints.end(),
                               [&](const lf::ModelHint& h) { return h.name == name; });
  return it == hints.end() ? nullptr : &*it;
}

lc::PreparedSweep sweep(const ls::SweepTruth& truth, double max_field_t, double noise_ohm) {
  ls::SweepPlan plan;
  plan.max_field_t = max_field_t;
  plan.n_points = 1201;
  plan.noise_rsq_ohm = noise_ohm;
  plan.seed = 21;
  return prepared(truth, plan);
}

}  // namespace

// Antilocalization: hln2d-so with L_phi = 500 nm (B_phi = 0.66 mT) and
// L_so = 100 nm (B_so = 16 mT), a sweep to +-0.3 T. Fitted with hln2d it
// gets the spin-orbit hint, quoting both fits' chi2_red against the noise,
// the hln2d-so refit describing the sweep (chi2_red near 1) far better.
TEST(ModelHints, AntilocalizationSuggestsSpinOrbit) {
  ls::SweepTruth truth;
  truth.model = Model::hln2d_so;
  truth.lphi_m = 500e-9;
  truth.lso_m = 100e-9;
  const lc::PreparedSweep s = sweep(truth, 0.3, 0.05);
  const lf::SweepFitOptions o;  // hln2d
  const lf::SweepFitResult r = lf::fit_sweep(s.points, o);
  ASSERT_TRUE(r.ok) << r.error;
  const auto hints = lf::model_hints(s.points, r, o, o.geometry);
  const lf::ModelHint* h = find(hints, "spin-orbit");
  ASSERT_NE(h, nullptr);
  EXPECT_EQ(h->suggested, Model::hln2d_so);
  ASSERT_TRUE(h->chi2_red_fitted && h->chi2_red_suggested);
  EXPECT_GT(*h->chi2_red_fitted, 3.0 * *h->chi2_red_suggested);
  EXPECT_LT(*h->chi2_red_suggested, 2.0);
  EXPECT_NE(h->message.find("hln2d-so"), std::string::npos) << h->message;
  EXPECT_NE(h->message.find("chi2_red"), std::string::npos) << h->message;
}

// Clean weak localization (hln2d, alpha = 1) gets no hint at all when the
// geometry is unknown or far from L_phi.
TEST(ModelHints, CleanWeakLocalizationHasNone) {
  for (std::uint64_t seed : {1u, 2u, 3u}) {
    ls::SweepTruth truth;  // L_phi = 200 nm
    ls::SweepPlan plan;
    plan.max_field_t = 0.1;
    plan.n_points = 801;
    plan.noise_rsq_ohm = 0.2;
    plan.seed = seed;
    const lc::PreparedSweep s = prepared(truth, plan);
    lf::SweepFitOptions o;
    o.geometry.width_m = 10e-6;
    o.geometry.thickness_m = 20e-9;
    const lf::SweepFitResult r = lf::fit_sweep(s.points, o);
    ASSERT_TRUE(r.ok) << r.error;
    EXPECT_TRUE(lf::model_hints(s.points, r, o, o.geometry).empty()) << "seed " << seed;
  }
}

// A film 300 nm wide with L_phi = 200 nm: L_phi is above half the width,
// the wire hint appears; 250 nm thick, L_phi is below the thickness, the 3D
// hint appears. Each message carries both lengths.
TEST(ModelHints, GeometrySuggestsWireOr3D) {
  ls::SweepTruth truth;  // hln2d, L_phi = 200 nm
  const lc::PreparedSweep s = sweep(truth, 0.1, 0.2);
  lf::SweepFitOptions o;
  const lf::SweepFitResult r = lf::fit_sweep(s.points, o);
  ASSERT_TRUE(r.ok) << r.error;
  lf::SampleGeometry narrow;
  narrow.width_m = 300e-9;
  const auto wire = lf::model_hints(s.points, r, o, narrow);
  const lf::ModelHint* w = find(wire, "wire-width");
  ASSERT_NE(w, nullptr);
  EXPECT_EQ(w->suggested, Model::wire1d);
  EXPECT_NE(w->message.find("300 nm"), std::string::npos) << w->message;
  EXPECT_EQ(find(wire, "below-thickness"), nullptr);
  lf::SampleGeometry thick;
  thick.thickness_m = 250e-9;
  const auto bulk = lf::model_hints(s.points, r, o, thick);
  const lf::ModelHint* t = find(bulk, "below-thickness");
  ASSERT_NE(t, nullptr);
  EXPECT_EQ(t->suggested, Model::kawabata3d);
  EXPECT_NE(t->message.find("250 nm"), std::string::npos) << t->message;
  EXPECT_EQ(find(bulk, "wire-width"), nullptr);
}
