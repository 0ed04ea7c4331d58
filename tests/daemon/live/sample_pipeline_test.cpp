// SamplePipeline on synthetic cooldowns (tests/daemon/live/synthetic_cooldown.hpp):
// sweeps found and fitted against the truth the readings were made from,
// the L_phi(T) verdict against the truth's exponent, invariance under
// chunking and interleaving of the streams, and restart equivalence.
#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>

#include "daemon/live/sample_pipeline.hpp"
#include "tests/daemon/live/synthetic_cooldown.hpp"

namespace {

using lphi::live::FitRecord;
using lphi::live::PipelineOutput;
using lphi::live::SamplePipeline;
using lphi::live::SampleSettings;
using lphi::live::testing::Cooldown;
using lphi::live::testing::CooldownPlan;

SampleSettings settings_for(const CooldownPlan& c) {
  SampleSettings s;
  s.name = "film";
  s.model = lphi::mc::Model::hln2d;
  s.geometry.squares = c.squares;
  s.geometry.width_m = 20e-6;
  s.geometry.thickness_m = 10e-9;
  s.excitation_a = c.excitation_a;
  s.gain = c.gain;
  // Plateaus here last about 200 s; sweeps need only one temperature run.
  s.segmenter.plateau.min_duration_s = 60.0;
  s.segmenter.min_span_t = 0.1;
  return s;
}

struct PipelineRun {
  PipelineOutput all;
  std::size_t reused = 0;
};

void append(PipelineOutput& to, PipelineOutput& from) {
  for (auto& x : from.sweeps) to.sweeps.push_back(std::move(x));
  for (auto& x : from.fits) to.fits.push_back(std::move(x));
  for (auto& x : from.zero_field) to.zero_field.push_back(std::move(x));
  for (auto& x : from.verdicts) to.verdicts.push_back(std::move(x));
  from.clear();
}

// Pushes the three streams merged in event time (ties: lock-in, field,
// thermometer), processing whenever the queue is full, as lphid does.
void push_merged(SamplePipeline& p, const Cooldown& d, std::size_t lockin_end, PipelineOutput& out) {
  std::size_t i = 0, j = 0, k = 0;
  const double t_end = lockin_end < d.lockin.size() ? d.lockin[lockin_end].t_s : 1e300;
  PipelineOutput step;
  while (true) {
    const double tl = i < d.lockin.size() ? d.lockin[i].t_s : 1e300;
    const double tf = j < d.field.size() ? d.field[j].t_s : 1e300;
    const double tt = k < d.thermometer.size() ? d.thermometer[k].t_s : 1e300;
    const double t = std::min({tl, tf, tt});
    if (t >= t_end) break;
    if (p.full()) {
      p.process(step, 1);
      append(out, step);
    }
    if (tl == t) {
      p.push(d.lockin[i++]);
    } else if (tf == t) {
      p.push(d.field[j++]);
    } else {
      p.push(d.thermometer[k++]);
    }
  }
  p.process(step);
  append(out, step);
}

PipelineRun run_all(const CooldownPlan&, const Cooldown& d, SampleSettings s,
            std::map<std::int64_t, FitRecord> stored = {}) {
  SamplePipeline p(std::move(s), std::move(stored));
  EXPECT_EQ(p.error(), "");
  PipelineRun r;
  push_merged(p, d, d.lockin.size(), r.all);
  PipelineOutput last;
  p.finish(last);
  append(r.all, last);
  r.reused = p.fits_reused();
  return r;
}

TEST(SamplePipeline, SweepsAreFoundAndFittedAgainstTheTruth) {
  const CooldownPlan plan;
  const Cooldown data = lphi::live::testing::make_cooldown(plan);
  const PipelineRun r = run_all(plan, data, settings_for(plan));
  // Two sweeps per plateau were made; each must be found, in order.
  ASSERT_EQ(r.all.sweeps.size(), data.sweep_temperature_k.size());
  ASSERT_EQ(r.all.fits.size(), data.sweep_temperature_k.size());
  for (std::size_t i = 0; i < r.all.sweeps.size(); ++i) {
    const auto& s = r.all.sweeps[i];
    const auto& f = r.all.fits[i];
    SCOPED_TRACE("sweep " + std::to_string(i));
    EXPECT_EQ(s.index, static_cast<std::int64_t>(i));
    EXPECT_EQ(s.direction, i % 2 == 0 ? lphi::segment::Direction::up : lphi::segment::Direction::down);
    EXPECT_FALSE(s.temperature_unstable);
    // The thermometer read the plateau's temperature exactly (no noise made).
    EXPECT_DOUBLE_EQ(s.temperature.mean_k, data.sweep_temperature_k[i]);
    EXPECT_LE(s.field_min_t, -0.095);
    EXPECT_GE(s.field_max_t, 0.095);
    // |Y/X| = 0.01 by construction of the readings.
    EXPECT_NEAR(s.max_quadrature_ratio, 0.01, 1e-12);
    ASSERT_TRUE(f.ok) << f.error;
    EXPECT_TRUE(f.used_in_dephasing);
    // L_phi within 5 standard errors of the truth it was made from (the fit's
    // error is a 1-sigma estimate; 5 keeps 16 sweeps clear of chance).
    const double truth = lphi::live::testing::truth_lphi_m(plan, data.sweep_temperature_k[i]);
    EXPECT_NEAR(f.lphi_m, truth, 5.0 * f.lphi_err_m) << "truth " << truth;
    EXPECT_LT(std::abs(f.lphi_m / truth - 1.0), 0.05);
    // chi2_red against the noise estimated from the sweep itself: the data
    // are the model plus white noise, so the residual variance is the noise
    // variance. With ~800 symmetrized points the chi-square of n - p degrees
    // of freedom divided by them has a spread of sqrt(2/800) = 5 %; the noise
    // estimate's own scale error is ~4 % (MAD of 800 values; see
    // tests/fit/conductance_test.cpp): [0.7, 1.4] is several of both.
    EXPECT_GT(f.chi2_red, 0.7);
    EXPECT_LT(f.chi2_red, 1.4);
    EXPECT_FALSE(f.result.at("point_noise_s").is_null());
    // sigma(0) against the truth: the robust zero-field estimate corrected by
    // the fitted offset, within 5 of its standard errors.
    ASSERT_TRUE(f.sigma0_s.has_value());
    const double sigma0 = lphi::live::testing::truth_sigma0_s(plan, data.sweep_temperature_k[i]);
    EXPECT_NEAR(*f.sigma0_s, sigma0, 5.0 * *f.sigma0_err_s + 1e-12);
  }
  // One zero-field point per plateau, two sweeps each at the end.
  ASSERT_FALSE(r.all.verdicts.empty());
  const auto& v = r.all.verdicts.back();
  EXPECT_EQ(v.state, "power-law");
  ASSERT_TRUE(v.exponent_p.has_value());
  const double p_err = v.json.at("exponent_p_err").get<double>();
  // p within 3 of its standard errors of the truth's 1.
  EXPECT_NEAR(*v.exponent_p, plan.p, 3.0 * p_err);
  EXPECT_EQ(v.n_points, data.sweep_temperature_k.size());
  EXPECT_EQ(v.json.at("n_zero_field_points").get<std::size_t>(), plan.plateaus_k.size());
  // Electrons at the bath temperature by construction: sigma_int follows ln T.
  EXPECT_EQ(v.electrons_cooling, std::optional<bool>(true));
  EXPECT_EQ(v.regime, std::optional<std::string>("2d"));
}

TEST(SamplePipeline, SaturationIsSeenAndCalledIntrinsic) {
  CooldownPlan plan;
  plan.plateaus_k = {1.0, 0.7, 0.5, 0.35, 0.25, 0.18, 0.13, 0.1, 0.07, 0.05};
  plan.lsat_m = 200e-9;  // L_phi would reach 380 nm at 50 mK; saturates near 200 nm
  const Cooldown data = lphi::live::testing::make_cooldown(plan);
  const PipelineRun r = run_all(plan, data, settings_for(plan));
  ASSERT_FALSE(r.all.verdicts.empty());
  const auto& v = r.all.verdicts.back();
  EXPECT_TRUE(v.state == "saturated" || v.state == "saturating") << v.json.dump(1);
  ASSERT_TRUE(v.lphi_sat_m.has_value());
  const double err = v.json.at("lphi_sat_err_m").get<double>();
  // Within 4 standard errors and 10% of the truth's L_sat.
  EXPECT_NEAR(*v.lphi_sat_m, plan.lsat_m, 4.0 * err);
  EXPECT_LT(std::abs(*v.lphi_sat_m / plan.lsat_m - 1.0), 0.10);
  // The interaction part keeps following ln T (electrons at the bath), and
  // the data reach below T_sat / 2: an intrinsic saturation (verdict.hpp).
  EXPECT_EQ(v.electrons_cooling, std::optional<bool>(true));
  EXPECT_EQ(v.likely_cause, std::optional<std::string>("intrinsic")) << v.json.dump(1);
}

// The output is a function of the readings, not of how they arrive: the
// streams pushed in 20 s windows, each window stream by stream in the
// reverse order (every lag within the Aligner's bounds), and with the
// queue drained only at the end of each window.
TEST(SamplePipeline, ChunkingAndInterleavingDoNotChangeTheResult) {
  const CooldownPlan plan;
  const Cooldown data = lphi::live::testing::make_cooldown(plan);
  const PipelineRun merged = run_all(plan, data, settings_for(plan));

  SamplePipeline p(settings_for(plan));
  PipelineOutput out, step;
  std::size_t i = 0, j = 0, k = 0;
  const double window_s = 20.0;
  for (double t = plan.t0_s; i < data.lockin.size() || j < data.field.size() || k < data.thermometer.size();
       t += window_s) {
    while (k < data.thermometer.size() && data.thermometer[k].t_s < t + window_s) p.push(data.thermometer[k++]);
    while (j < data.field.size() && data.field[j].t_s < t + window_s) p.push(data.field[j++]);
    while (i < data.lockin.size() && data.lockin[i].t_s < t + window_s) p.push(data.lockin[i++]);
    p.process(step);
    append(out, step);
  }
  p.finish(step);
  append(out, step);
  EXPECT_EQ(out.sweeps, merged.all.sweeps);
  EXPECT_EQ(out.fits, merged.all.fits);
  EXPECT_EQ(out.zero_field, merged.all.zero_field);
  ASSERT_EQ(out.verdicts.size(), merged.all.verdicts.size());
  EXPECT_EQ(out.verdicts.back().json, merged.all.verdicts.back().json);
}

// A restart: the pipeline saw 60% of the readings and stored its fits; a new
// pipeline re-reads everything from the start with those fits. It must reuse
// them (not refit), end with the same fits and the same verdict as a run
// without a restart.
TEST(SamplePipeline, RestartReusesStoredFitsAndEndsWithTheSameVerdict) {
  const CooldownPlan plan;
  const Cooldown data = lphi::live::testing::make_cooldown(plan);
  const PipelineRun straight = run_all(plan, data, settings_for(plan));

  SamplePipeline before(settings_for(plan));
  PipelineOutput first;
  push_merged(before, data, data.lockin.size() * 6 / 10, first);
  ASSERT_GE(first.fits.size(), 4u);
  ASSERT_LT(first.fits.size(), straight.all.fits.size());
  std::map<std::int64_t, FitRecord> stored;
  for (const auto& f : first.fits) stored[f.sweep_index] = f;
  const std::size_t n_stored = stored.size();
  // The stored verdict after the last stored fit must be reproduced too.
  const auto verdict_before = first.verdicts.back();

  const PipelineRun after = run_all(plan, data, settings_for(plan), stored);
  EXPECT_EQ(after.reused, n_stored);
  EXPECT_EQ(after.all.fits, straight.all.fits);  // from_store is not compared
  for (std::size_t n = 0; n < after.all.fits.size(); ++n) {
    EXPECT_EQ(after.all.fits[n].from_store, n < n_stored) << n;
  }
  ASSERT_FALSE(after.all.verdicts.empty());
  EXPECT_EQ(after.all.verdicts.back().json, straight.all.verdicts.back().json);
  // Only one verdict is recomputed for the stored fits: the one after the
  // last of them, equal to the verdict stored then.
  EXPECT_EQ(after.all.verdicts.size(), 1 + straight.all.fits.size() - n_stored);
  EXPECT_EQ(after.all.verdicts.front().json, verdict_before.json);

  // A stored fit is taken as it is: a marked value comes back unchanged,
  // which a refit could not produce.
  stored.begin()->second.lphi_err_m = 12345.0;
  const PipelineRun marked = run_all(plan, data, settings_for(plan), stored);
  EXPECT_EQ(marked.all.fits.front().lphi_err_m, 12345.0);
}

TEST(SamplePipeline, CombinedUpAndDownSweepsAreFittedTogether) {
  const CooldownPlan plan;
  const Cooldown data = lphi::live::testing::make_cooldown(plan);
  const PipelineRun single = run_all(plan, data, settings_for(plan));
  SampleSettings s = settings_for(plan);
  s.combine_up_down = true;
  const PipelineRun combined = run_all(plan, data, s);
  ASSERT_EQ(combined.all.sweeps.size(), data.sweep_temperature_k.size());
  ASSERT_EQ(combined.all.fits.size(), plan.plateaus_k.size());
  for (std::size_t n = 0; n < combined.all.fits.size(); ++n) {
    const auto& f = combined.all.fits[n];
    SCOPED_TRACE("fit " + std::to_string(n));
    EXPECT_EQ(f.sweep_index, static_cast<std::int64_t>(2 * n + 1));
    EXPECT_EQ(f.combined_with, std::optional<std::int64_t>(static_cast<std::int64_t>(2 * n)));
    ASSERT_TRUE(f.ok) << f.error;
    const double truth = lphi::live::testing::truth_lphi_m(plan, plan.plateaus_k[n]);
    EXPECT_NEAR(f.lphi_m, truth, 5.0 * f.lphi_err_m);
    // Twice the readings: the error shrinks by about sqrt(2) against either
    // sweep alone (1.2 leaves room for the fits' own scatter of errors).
    EXPECT_LT(f.lphi_err_m * 1.2, single.all.fits[2 * n].lphi_err_m);
  }
}

TEST(SamplePipeline, ASweepAcrossATemperatureChangeIsKeptOutOfLphiOfT) {
  CooldownPlan plan;
  plan.plateaus_k = {0.5};
  Cooldown data = lphi::live::testing::make_cooldown(plan);
  // Heat by 10% during the second (down) sweep: its points leave the run.
  const double t_mid = data.lockin[data.lockin.size() - 500].t_s;
  for (auto& r : data.thermometer) {
    if (r.t_s > t_mid) r.temperature_k = 0.55;
  }
  const PipelineRun r = run_all(plan, data, settings_for(plan));
  ASSERT_EQ(r.all.fits.size(), 2u);
  EXPECT_FALSE(r.all.sweeps[0].temperature_unstable);
  EXPECT_TRUE(r.all.sweeps[1].temperature_unstable);
  EXPECT_TRUE(r.all.fits[0].used_in_dephasing);
  EXPECT_FALSE(r.all.fits[1].used_in_dephasing);
  // Kept out by what the step does to L_phi, with the numbers: a 10 % step
  // over the points the fit used is a ramp or a drift beyond the fit's error.
  const auto& q = r.all.fits[1].quality;
  const auto reason = std::find_if(q.begin(), q.end(), [](const std::string& s) {
    return s.rfind("temperature-ramp: ", 0) == 0 || s.rfind("temperature-drift: ", 0) == 0;
  });
  ASSERT_NE(reason, q.end()) << ::testing::PrintToString(q);
  EXPECT_NE(reason->find(" %"), std::string::npos) << *reason;
  EXPECT_EQ(r.all.verdicts.back().n_points, 1u);
}

TEST(SamplePipeline, BadSettingsAreNamedAndNothingIsEmitted) {
  const CooldownPlan plan;
  SampleSettings s = settings_for(plan);
  s.excitation_a = 0.0;
  SamplePipeline p(s);
  EXPECT_NE(p.error().find("excitation_a"), std::string::npos) << p.error();
  const Cooldown data = lphi::live::testing::make_cooldown(plan);
  PipelineOutput out;
  push_merged(p, data, data.lockin.size(), out);
  p.finish(out);
  EXPECT_TRUE(out.sweeps.empty());
  EXPECT_TRUE(out.fits.empty());

  SampleSettings wire = settings_for(plan);
  wire.model = lphi::mc::Model::wire1d;
  wire.geometry.width_m = 0.0;
  EXPECT_NE(lphi::live::validate(wire).find("width_m"), std::string::npos);
}

// Bad readings (a zero current makes R undefined) give a failed fit with a
// reason, not a plausible number.
TEST(SamplePipeline, UnpreparableSweepsFailWithAReason) {
  CooldownPlan plan;
  plan.plateaus_k = {0.5};
  Cooldown data = lphi::live::testing::make_cooldown(plan);
  for (auto& r : data.lockin) r.x_v = -std::abs(r.x_v);  // negative resistance
  const PipelineRun r = run_all(plan, data, settings_for(plan));
  ASSERT_EQ(r.all.fits.size(), 2u);
  EXPECT_FALSE(r.all.fits[0].ok);
  // The reason names the reading and what is wrong with it.
  EXPECT_NE(r.all.fits[0].error.find("sheet resistance of -"), std::string::npos) << r.all.fits[0].error;
  EXPECT_NE(r.all.fits[0].error.find("reading"), std::string::npos) << r.all.fits[0].error;
  EXPECT_FALSE(r.all.fits[0].used_in_dephasing);
  EXPECT_EQ(r.all.verdicts.back().state, "insufficient-data");
}

}  // namespace

namespace {

// Two cooldowns of one sample in one stream of readings: `first` (t0 as
// planned), then the thermometer at 40 K for 100 s (warmed up; lock-in and
// magnet not read meanwhile), then `second` from 200 s after the first ended.
Cooldown thermal_cycle(const CooldownPlan& first, CooldownPlan second, std::size_t& first_sweeps) {
  Cooldown a = lphi::live::testing::make_cooldown(first);
  const double warm_from = a.lockin.back().t_s + 1.0;
  second.t0_s = warm_from + 200.0;
  const Cooldown b = lphi::live::testing::make_cooldown(second);
  first_sweeps = a.sweep_temperature_k.size();
  for (double t = warm_from; t < warm_from + 100.0; t += 1.0) a.thermometer.push_back({t, 40.0});
  a.lockin.insert(a.lockin.end(), b.lockin.begin(), b.lockin.end());
  a.field.insert(a.field.end(), b.field.begin(), b.field.end());
  a.thermometer.insert(a.thermometer.end(), b.thermometer.begin(), b.thermometer.end());
  a.sweep_temperature_k.insert(a.sweep_temperature_k.end(), b.sweep_temperature_k.begin(),
                               b.sweep_temperature_k.end());
  return a;
}

CooldownPlan saturating_plan() {
  CooldownPlan plan;
  plan.plateaus_k = {1.0, 0.7, 0.5, 0.35, 0.25, 0.18, 0.13, 0.1, 0.07, 0.05};
  plan.lsat_m = 200e-9;
  return plan;
}

}  // namespace

// A warm-up above new_cooldown_above_k between two cooldowns: the second's
// sweeps, fits, sigma(0) points and verdicts are cooldown 2 and its L_phi(T)
// leaves the first cooldown's saturated sweeps out. The truths: the first
// cooldown saturates (L_sat = 200 nm), the second follows T^-1/2 (p = 1).
TEST(SamplePipeline, AWarmUpStartsANewCooldownAnalysedOnItsOwn) {
  CooldownPlan second;
  second.plateaus_k = {1.0, 0.7, 0.5, 0.35, 0.25, 0.18};
  std::size_t n_first = 0;
  const Cooldown data = thermal_cycle(saturating_plan(), second, n_first);
  SampleSettings settings = settings_for(second);
  settings.new_cooldown_above_k = 30.0;
  const PipelineRun r = run_all(second, data, settings);
  ASSERT_EQ(r.all.sweeps.size(), data.sweep_temperature_k.size());
  ASSERT_EQ(r.all.fits.size(), data.sweep_temperature_k.size());
  for (std::size_t i = 0; i < r.all.sweeps.size(); ++i) {
    const std::int64_t expected = i < n_first ? 1 : 2;
    EXPECT_EQ(r.all.sweeps[i].cooldown, expected) << "sweep " << i;
    EXPECT_EQ(r.all.fits[i].cooldown, expected) << "fit " << i;
  }
  const double second_start_s = r.all.sweeps[n_first].t_start_s;
  for (const auto& z : r.all.zero_field) EXPECT_EQ(z.cooldown, z.t_s > second_start_s ? 2 : 1) << z.t_s;
  ASSERT_EQ(r.all.verdicts.size(), r.all.fits.size());
  // The first cooldown's last verdict: its own sweeps, saturating or saturated.
  const auto& end_first = r.all.verdicts[n_first - 1];
  EXPECT_EQ(end_first.cooldown, 1);
  EXPECT_EQ(end_first.n_points, n_first);
  EXPECT_TRUE(end_first.state == "saturated" || end_first.state == "saturating") << end_first.json.dump(1);
  // The second cooldown's first verdict has one fit: too little for L_phi(T).
  EXPECT_EQ(r.all.verdicts[n_first].cooldown, 2);
  EXPECT_EQ(r.all.verdicts[n_first].state, "insufficient-data");
  EXPECT_EQ(r.all.verdicts[n_first].json.at("n_fits").get<std::size_t>(), 1u);
  const auto& v = r.all.verdicts.back();
  EXPECT_EQ(v.cooldown, 2);
  EXPECT_EQ(v.json.at("cooldown").get<std::int64_t>(), 2);
  EXPECT_EQ(v.n_points, data.sweep_temperature_k.size() - n_first);
  EXPECT_EQ(v.json.at("n_zero_field_points").get<std::size_t>(), second.plateaus_k.size());
  EXPECT_EQ(v.state, "power-law") << v.json.dump(1);
  ASSERT_TRUE(v.exponent_p.has_value());
  // p within 3 of its standard errors of the second cooldown's truth.
  EXPECT_NEAR(*v.exponent_p, second.p, 3.0 * v.json.at("exponent_p_err").get<double>());
  EXPECT_EQ(v.electrons_cooling, std::optional<bool>(true));
  // Each zero-field point belongs to the cooldown of its plateau's sweeps.
  std::size_t second_points = 0;
  for (const auto& z : r.all.zero_field) second_points += z.cooldown == 2 ? 1 : 0;
  EXPECT_GE(second_points, second.plateaus_k.size());

  // The same readings with the threshold above the warm-up: one cooldown.
  // Its L_phi(T) takes every sweep except those of the second half that
  // disagree with a sweep of the first at the same temperature by more than
  // 3 standard errors (the film saturated in the first, not in the second),
  // each with its reason.
  settings.new_cooldown_above_k = 100.0;
  const PipelineRun one = run_all(second, data, settings);
  for (const auto& s : one.all.sweeps) EXPECT_EQ(s.cooldown, 1);
  std::size_t used = 0, disagree = 0;
  for (const auto& f : one.all.fits) {
    if (f.used_in_dephasing) {
      ++used;
      continue;
    }
    const bool flagged = std::any_of(f.quality.begin(), f.quality.end(), [](const std::string& s) {
      return s.rfind("disagrees-with-plateau: ", 0) == 0;
    });
    EXPECT_TRUE(flagged) << "sweep " << f.sweep_index << ": " << ::testing::PrintToString(f.quality);
    if (flagged) ++disagree;
  }
  EXPECT_GT(disagree, 0u);
  EXPECT_EQ(one.all.verdicts.back().n_points, used);
  EXPECT_EQ(used + disagree, data.sweep_temperature_k.size());
}

// Only a warm-up from below half the threshold counts: with the threshold
// at 0.9 K, plateaus at 0.7, 1.0, 0.7, 1.0 K cross it twice without ever
// cooling below 0.45 K (one cooldown); after the plateau at 0.4 K the next
// 1.0 K is a new one. Readings at 0.1 K and then 50 K for 90 s before the
// first sweep (a recording that starts with a warm-up, long enough to
// count) do not make the first sweep's cooldown 2: the first sweep is
// cooldown 1.
TEST(SamplePipeline, OnlyAWarmUpFromBelowHalfTheThresholdCounts) {
  CooldownPlan plan;
  plan.plateaus_k = {0.7, 1.0, 0.7, 1.0, 0.4, 1.0};
  Cooldown data = lphi::live::testing::make_cooldown(plan);
  std::vector<lphi::align::TemperatureReading> before;
  for (double t = plan.t0_s - 200.0; t < plan.t0_s - 10.0; t += 1.0)
    before.push_back({t, t < plan.t0_s - 100.0 ? 0.1 : 50.0});
  data.thermometer.insert(data.thermometer.begin(), before.begin(), before.end());
  SampleSettings settings = settings_for(plan);
  settings.new_cooldown_above_k = 0.9;
  const PipelineRun r = run_all(plan, data, settings);
  ASSERT_EQ(r.all.sweeps.size(), data.sweep_temperature_k.size());
  for (std::size_t i = 0; i < r.all.sweeps.size(); ++i)
    EXPECT_EQ(r.all.sweeps[i].cooldown, i < 10 ? 1 : 2) << "sweep " << i << " at " << data.sweep_temperature_k[i];
}

// A wild thermometer reading (an open lead reads hundreds of kelvin) or a
// short excursion above the threshold is not a thermal cycle: a warm-up
// must stay above new_cooldown_above_k for 60 s of readings. The control
// case, the same excursion lasting 100 s, does start cooldown 2, so the
// check can fail.
TEST(SamplePipeline, AWildThermometerReadingIsNotAWarmUp) {
  CooldownPlan plan;
  plan.plateaus_k = {1.0, 0.7, 0.5, 0.35};
  const Cooldown base = lphi::live::testing::make_cooldown(plan);
  ASSERT_GE(base.sweep_temperature_k.size(), 4u);
  // In the middle of the cooldown the thermometer reads 300 K once, then
  // 40 K for duration_s, in place of its own readings.
  const double mid_t = 0.5 * (base.lockin.front().t_s + base.lockin.back().t_s);
  auto with_excursion = [&](double duration_s) {
    Cooldown d = base;
    std::erase_if(d.thermometer, [&](const auto& r) {
      return r.t_s >= mid_t && r.t_s < mid_t + 2.5 + duration_s;
    });
    d.thermometer.push_back({mid_t + 0.5, 300.0});
    for (double t = mid_t + 2.5; t < mid_t + 2.5 + duration_s; t += 1.0) d.thermometer.push_back({t, 40.0});
    std::stable_sort(d.thermometer.begin(), d.thermometer.end(),
                     [](const auto& a, const auto& b) { return a.t_s < b.t_s; });
    return d;
  };
  SampleSettings settings = settings_for(plan);
  settings.new_cooldown_above_k = 30.0;
  const PipelineRun glitch = run_all(plan, with_excursion(30.0), settings);
  ASSERT_FALSE(glitch.all.sweeps.empty());
  for (const auto& sw : glitch.all.sweeps) EXPECT_EQ(sw.cooldown, 1) << "sweep " << sw.index;
  const PipelineRun warmed = run_all(plan, with_excursion(100.0), settings);
  std::int64_t last = 0;
  for (const auto& sw : warmed.all.sweeps) last = std::max(last, sw.cooldown);
  EXPECT_EQ(last, 2);
}

// Restart in the second cooldown: the stored fits are reused, the cooldowns
// recomputed from the readings, and the last verdict is the uninterrupted one.
TEST(SamplePipeline, RestartInTheSecondCooldownEndsWithTheSameVerdict) {
  CooldownPlan second;
  second.plateaus_k = {1.0, 0.7, 0.5, 0.35};
  std::size_t n_first = 0;
  const Cooldown data = thermal_cycle(saturating_plan(), second, n_first);
  SampleSettings settings = settings_for(second);
  const PipelineRun straight = run_all(second, data, settings);
  SamplePipeline before(settings);
  PipelineOutput first;
  push_merged(before, data, data.lockin.size() * 9 / 10, first);
  ASSERT_GT(first.fits.size(), n_first);
  std::map<std::int64_t, FitRecord> stored;
  for (const auto& f : first.fits) stored[f.sweep_index] = f;
  const PipelineRun after = run_all(second, data, settings, stored);
  EXPECT_EQ(after.reused, stored.size());
  EXPECT_EQ(after.all.fits, straight.all.fits);
  EXPECT_EQ(after.all.verdicts.back().json, straight.all.verdicts.back().json);
  EXPECT_EQ(after.all.verdicts.back().cooldown, 2);
}
