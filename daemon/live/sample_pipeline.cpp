// One algorithm, kept in one file although it runs past 500 lines: one
// sample's live analysis as a pure value (sample_pipeline.hpp), readings in,
// records out: align, segment, number the cooldowns, fit each sweep, update
// sigma(0) per plateau and assess the verdict, in that order.
#include "daemon/live/sample_pipeline.hpp"

#include <algorithm>
#include <cmath>
#include <utility>

#include <fmt/format.h>

#include "analysis/conductance.hpp"
#include "analysis/sweep_analysis.hpp"
#include "analysis/verdict.hpp"
#include "daemon/live/fit_admission.hpp"
#include "schema/result_json.hpp"

namespace lphi::live {

namespace {

bool positive_finite(double v) { return std::isfinite(v) && v > 0.0; }

// Chan, Golub and LeVeque's pairwise combination of means and variances
// (Am. Stat. 37, 242 (1983)): the statistics of the union of two samples.
segment::TemperatureStats combine(const segment::TemperatureStats& a, const segment::TemperatureStats& b) {
  if (a.n == 0) return b;
  if (b.n == 0) return a;
  segment::TemperatureStats c;
  c.n = a.n + b.n;
  const double na = static_cast<double>(a.n), nb = static_cast<double>(b.n), n = static_cast<double>(c.n);
  const double delta = b.mean_k - a.mean_k;
  c.mean_k = a.mean_k + delta * nb / n;
  const double m2 = a.std_k * a.std_k * (na - 1.0) + b.std_k * b.std_k * (nb - 1.0) + delta * delta * na * nb / n;
  c.std_k = c.n > 1 ? std::sqrt(m2 / (n - 1.0)) : 0.0;
  c.min_k = std::min(a.min_k, b.min_k);
  c.max_k = std::max(a.max_k, b.max_k);
  return c;
}

double median(std::vector<double> v) {
  std::sort(v.begin(), v.end());
  const std::size_t n = v.size();
  return n % 2 == 1 ? v[n / 2] : 0.5 * (v[n / 2 - 1] + v[n / 2]);
}

nlohmann::json optional_bool_json(const std::optional<bool>& b) {
  return b ? nlohmann::json(*b) : nlohmann::json(nullptr);
}

}  // namespace

bool FitRecord::operator==(const FitRecord& o) const {
  return sweep_index == o.sweep_index && combined_with == o.combined_with && ok == o.ok &&
         error == o.error && model == o.model && lphi_m == o.lphi_m && lphi_err_m == o.lphi_err_m &&
         chi2_red == o.chi2_red && converged == o.converged && flags == o.flags &&
         temperature_k == o.temperature_k && temperature_spread_k == o.temperature_spread_k &&
         temperature_run == o.temperature_run && cooldown == o.cooldown &&
         temperature_unstable == o.temperature_unstable &&
         sigma0_s == o.sigma0_s && sigma0_err_s == o.sigma0_err_s &&
         used_in_dephasing == o.used_in_dephasing && quality == o.quality && result == o.result &&
         t_s == o.t_s;
}

void PipelineOutput::clear() {
  sweeps.clear();
  fits.clear();
  zero_field.clear();
  verdicts.clear();
}

int model_dimension(mc::Model model) {
  switch (model) {
    case mc::Model::wire1d: return 1;
    case mc::Model::kawabata3d: return 3;
    case mc::Model::hln2d:
    case mc::Model::hln2d_so: break;
  }
  return 2;
}

std::string validate(const SampleSettings& s) {
  if (s.name.empty()) return "the sample has no name";
  if (!positive_finite(s.excitation_a)) return "excitation_a must be a positive current";
  if (!positive_finite(s.gain)) return "gain must be positive";
  if (!positive_finite(s.geometry.squares)) return "squares must be positive";
  if (s.model == mc::Model::wire1d && !positive_finite(s.geometry.width_m)) {
    return "the wire1d model needs width_m > 0";
  }
  if (s.model == mc::Model::kawabata3d && !positive_finite(s.geometry.thickness_m)) {
    return "the kawabata3d model needs thickness_m > 0";
  }
  if (s.fit_window_t && !positive_finite(*s.fit_window_t)) return "fit_window_t must be positive";
  if (s.probe_length_m && !positive_finite(*s.probe_length_m)) return "probe_length_m must be positive";
  if (s.max_queued_sweeps < 1) return "max_queued_sweeps must be at least 1";
  if (!positive_finite(s.new_cooldown_above_k)) return "new_cooldown_above_k must be a positive temperature";
  if (auto e = align::validate(s.aligner); !e.empty()) return e;
  if (auto e = segment::validate(s.segmenter); !e.empty()) return e;
  return "";
}

nlohmann::json no_data_verdict_json() {
  dephasing::DephasingResult empty;
  nlohmann::json j = schema::dephasing_json(empty);
  j["electrons_cooling"] = nullptr;
  j["likely_cause"] = nullptr;
  j["regime"] = nullptr;
  j["updated_at"] = nullptr;
  j["evidence"] = nlohmann::json::object();
  j["n_fits"] = 0;
  j["cooldown"] = nullptr;
  return j;
}

SamplePipeline::SamplePipeline(SampleSettings settings, std::map<std::int64_t, FitRecord> stored)
    : settings_(std::move(settings)),
      error_(validate(settings_)),
      aligner_(settings_.aligner),
      segmenter_(settings_.segmenter),
      stored_(std::move(stored)) {}

void SamplePipeline::push(const align::LockinReading& r) {
  if (!error_.empty()) return;
  aligner_.push(r, scratch_);
  take(scratch_);
}

void SamplePipeline::push(const align::TemperatureReading& r) {
  if (!error_.empty()) return;
  note_temperature(r);
  aligner_.push(r, scratch_);
  take(scratch_);
}

void SamplePipeline::push(const align::FieldReading& r) {
  if (!error_.empty()) return;
  aligner_.push(r, scratch_);
  take(scratch_);
}

void SamplePipeline::take(std::vector<align::AlignedPoint>& points) {
  if (points.empty()) return;
  segmenter_.push(std::span<const align::AlignedPoint>(points), segmented_);
  points.clear();
  segmented_.plateaus.clear();  // plateaus matter through each sweep's temperature run
  for (auto& s : segmented_.sweeps) enqueue(std::move(s));
  segmented_.sweeps.clear();
}

void SamplePipeline::note_temperature(const align::TemperatureReading& r) {
  if (!std::isfinite(r.temperature_k)) return;  // the aligner counts it
  const double threshold = settings_.new_cooldown_above_k;
  if (r.temperature_k <= threshold) above_since_s_.reset();
  if (r.temperature_k < 0.5 * threshold) {
    cooled_ = true;
  } else if (cooled_ && r.temperature_k > threshold) {
    // A warm-up lasts: readings above the threshold for warmup_min_s. One
    // wild reading (an open thermometer lead reads hundreds of kelvin) is
    // not a thermal cycle.
    if (!above_since_s_) above_since_s_ = r.t_s;
    if (r.t_s - *above_since_s_ >= warmup_min_s) {
      cooled_ = false;
      if (warmups_.size() == max_warmups) warmups_.pop_front();
      warmups_.push_back(*above_since_s_);
      above_since_s_.reset();
    }
  }
}

// A sweep is emitted once the thermometer readings around its points were
// pushed (the aligner interpolates between readings on each side), so every
// warm-up before its start is known by then.
void SamplePipeline::enqueue(segment::Sweep&& sweep) {
  bool warmed = false;
  while (!warmups_.empty() && warmups_.front() <= sweep.t_start_s) {
    warmed = warmed || cooldown_ == 0 || warmups_.front() > last_sweep_start_s_;
    warmups_.pop_front();
  }
  if (cooldown_ == 0) {
    cooldown_ = 1;  // a warm-up before the first sweep is the cooldown's start
  } else if (warmed) {
    ++cooldown_;
  }
  last_sweep_start_s_ = sweep.t_start_s;
  sweep_cooldown_[sweep.index] = cooldown_;
  queue_.push_back(std::move(sweep));
}

std::int64_t SamplePipeline::cooldown_of(const segment::Sweep& sweep) const {
  const auto it = sweep_cooldown_.find(sweep.index);
  return it != sweep_cooldown_.end() ? it->second : cooldown_;
}

void SamplePipeline::process(PipelineOutput& out, std::size_t max_sweeps) {
  for (std::size_t i = 0; i < max_sweeps && !queue_.empty(); ++i) {
    segment::Sweep sweep = std::move(queue_.front());
    queue_.pop_front();
    handle(std::move(sweep), out);
  }
}

void SamplePipeline::finish(PipelineOutput& out) {
  if (!error_.empty()) return;
  aligner_.flush(scratch_);
  take(scratch_);
  segmenter_.finish(segmented_);
  segmented_.plateaus.clear();
  for (auto& s : segmented_.sweeps) enqueue(std::move(s));
  segmented_.sweeps.clear();
  process(out);
  if (waiting_) {
    segment::Sweep alone = std::move(*waiting_);
    waiting_.reset();
    fit_and_record({&alone}, out);
  }
}

void SamplePipeline::handle(segment::Sweep&& sweep, PipelineOutput& out) {
  ++sweeps_seen_;
  out.sweeps.push_back(describe(sweep));
  if (!settings_.combine_up_down) return fit_and_record({&sweep}, out);
  if (waiting_ && !sweep.temperature_unstable && waiting_->temperature_run == sweep.temperature_run &&
      cooldown_of(*waiting_) == cooldown_of(sweep) && waiting_->direction != sweep.direction) {
    segment::Sweep first = std::move(*waiting_);
    waiting_.reset();
    return fit_and_record({&first, &sweep}, out);
  }
  if (waiting_) {
    segment::Sweep alone = std::move(*waiting_);
    waiting_.reset();
    fit_and_record({&alone}, out);
  }
  if (sweep.temperature_unstable) return fit_and_record({&sweep}, out);
  waiting_ = std::move(sweep);
}

SweepRecord SamplePipeline::describe(const segment::Sweep& s) const {
  SweepRecord r;
  r.index = static_cast<std::int64_t>(s.index);
  r.direction = s.direction;
  r.t_start_s = s.t_start_s;
  r.t_end_s = s.t_end_s;
  r.field_min_t = s.field_min_t;
  r.field_max_t = s.field_max_t;
  r.n_points = s.points.size();
  r.temperature = s.temperature;
  r.temperature_run = static_cast<std::int64_t>(s.temperature_run);
  r.cooldown = cooldown_of(s);
  r.temperature_unstable = s.temperature_unstable;
  r.truncated = s.truncated;
  double sum_abs_x = 0.0;
  for (const auto& p : s.points) {
    const auto lc = checks::lockin_reading(p.x_v, p.y_v, p.range_v, p.overload, settings_.lockin);
    if (lc.overload) ++r.n_overload;
    r.max_quadrature_ratio = std::max(r.max_quadrature_ratio, lc.quadrature_ratio);
    sum_abs_x += std::abs(p.x_v);
  }
  if (!s.points.empty()) {
    r.sample_voltage_v = sum_abs_x / static_cast<double>(s.points.size()) / settings_.gain;
    const auto heating = checks::excitation_heating(r.sample_voltage_v, s.temperature.mean_k, 0.0, 0.0,
                                                    settings_.heating);
    if (heating.error.empty() && std::isfinite(heating.ratio)) r.excitation_ratio = heating.ratio;
  }
  return r;
}

FitRecord SamplePipeline::fit_points(const std::vector<const segment::Sweep*>& sweeps,
                                     const SweepRecord& last) {
  FitRecord rec;
  rec.model = std::string(mc::model_name(settings_.model));
  rec.t_s = last.t_end_s;
  // One leg per sweep (two for a combined up and down pair), in time order:
  // the sweep analysis centres each on its own cusp (analysis/sweep_analysis.hpp).
  std::vector<std::vector<sweep::Reading>> legs;
  for (const auto* s : sweeps) {
    auto& leg = legs.emplace_back();
    leg.reserve(s->points.size());
    for (const auto& p : s->points) {
      const double r = conductance::resistance_ohm(p.x_v, settings_.excitation_a, settings_.gain);
      leg.push_back({p.t_s, p.field_t, conductance::sheet_resistance_ohm(r, settings_.geometry.squares),
                     p.time_constant_s});
    }
  }
  sweep::Options options;
  options.fit.model = settings_.model;
  options.fit.geometry = settings_.geometry;
  options.fit.alpha_fixed = settings_.alpha_fixed;
  options.fit.fit_background = settings_.fit_background;
  options.fit.window_t = settings_.fit_window_t;
  options.temperature_k = last.temperature.mean_k;
  // The segmenter emits one-sided sweeps for unipolar and one-way magnets:
  // fitted with the odd-in-B term, said so in the reasons.
  options.allow_one_sided = true;
  const sweep::Analysis a = sweep::analyze(legs, options);
  rec.result = schema::sweep_analysis_json(a);
  if (!a.ok) {
    rec.error = "the sweep could not be analysed: " + a.error;
    rec.quality = {"fit-failed: " + rec.error};
    rec.result["error"] = rec.error;
    return rec;
  }
  for (const auto& leg : a.legs) rec.leg_centres.push_back(leg.centre);
  rec.ok = a.fitted && a.fit.ok;
  rec.error = rec.ok ? "" : (a.fitted ? "the fit failed: " + a.fit.error : a.fit.error);
  if (!rec.ok) rec.result["error"] = rec.error;
  rec.lphi_m = a.fit.lphi_m;
  rec.lphi_err_m = a.fit.lphi_err_m;
  // chi2_red against the sweep's own noise (dimensionless, about 1 when the
  // model describes the sweep); fit_sweep's own is in the result as
  // chi2_red_quantum.
  rec.chi2_red = a.chi2_red.value_or(a.fit.chi2_red);
  rec.converged = a.fit.converged;
  for (fit::Flag f : a.fit.flags) rec.flags.emplace_back(fit::flag_name(f));
  if (a.fitted && std::isfinite(a.sigma0_s) && a.sigma0_s > 0.0) {
    rec.sigma0_s = a.sigma0_s;
    rec.sigma0_err_s = a.sigma0_err_s;
  }
  for (const auto& reason : a.reasons) rec.quality.push_back(reason.name + ": " + reason.sentence);
  // sweep::analyze already leaves out a failed or unconverged fit and the
  // flags checks::fit_quality names (window-too-narrow, too-few-points,
  // parameter-at-limit, not-converged), so its verdict is the one used.
  rec.used_in_dephasing = a.usable;
  return rec;
}

void SamplePipeline::fit_and_record(std::vector<const segment::Sweep*> sweeps, PipelineOutput& out) {
  const SweepRecord last = describe(*sweeps.back());
  segment::TemperatureStats temperature;
  bool unstable = false;
  for (const auto* s : sweeps) {
    temperature = combine(temperature, s->temperature);
    unstable = unstable || s->temperature_unstable;
  }
  FitRecord rec;
  auto stored = stored_.find(last.index);
  // A stored fit belongs to this sweep only if it ended at the same reading
  // (settings changed since it was stored would segment differently).
  if (stored != stored_.end() && stored->second.t_s != last.t_end_s) {
    stored_.erase(stored);
    stored = stored_.end();
  }
  if (stored != stored_.end()) {
    rec = std::move(stored->second);
    stored_.erase(stored);
    rec.from_store = true;
    ++fits_reused_;
  } else {
    rec = fit_points(sweeps, last);
  }
  // What the segmentation says about the sweeps is recomputed, never stored.
  rec.sweep_index = last.index;
  rec.combined_with = sweeps.size() > 1 ? std::optional<std::int64_t>(static_cast<std::int64_t>(sweeps.front()->index))
                                        : std::nullopt;
  rec.temperature_k = temperature.mean_k;
  rec.temperature_spread_k = temperature.std_k;
  rec.temperature_run = last.temperature_run;
  rec.cooldown = last.cooldown;
  rec.temperature_unstable = unstable;
  rec.t_s = last.t_end_s;
  // The temperature the fit is reported at and, for a fresh fit, whether its
  // drift and its plateau let it into L_phi(T) (fit_admission.hpp).
  const auto fitted_p = fitted_p_.find(rec.cooldown);
  const double exponent_s = drift_exponent(
      model_dimension(settings_.model),
      fitted_p != fitted_p_.end() ? std::optional<double>(fitted_p->second) : std::nullopt);
  judge_temperature(rec, sweeps, exponent_s, !rec.from_store);
  if (!rec.from_store) compare_with_plateau(rec, fits_, exponent_s);
  if (sweeps.size() == 1) split_field_axis(rec, *sweeps.front());
  for (const auto* s : sweeps) sweep_cooldown_.erase(s->index);
  fits_.push_back(rec);
  out.fits.push_back(rec);
  update_zero_field(rec, out);
  if (!rec.from_store || stored_.empty()) {
    out.verdicts.push_back(assess(rec));
    if (const auto& p = out.verdicts.back().exponent_p; p && std::isfinite(*p)) fitted_p_[rec.cooldown] = *p;
  }
}

// Remanence and lag from a single leg and the leg of the other direction
// before it on the same temperature run (field_axis::split): the common part
// of their centres is the remanent field, the opposite part rate x delay.
// A lag field above kOffsetAlertFraction of B_phi is noted, with advice when
// the fit has none. A fit read back from the store is not changed, but its
// centre (from its result's "legs") is remembered, so that the split after
// a restart is the one made before it.
void SamplePipeline::split_field_axis(FitRecord& rec, const segment::Sweep& leg) {
  field_axis::Centre centre;
  if (rec.leg_centres.size() == 1) {
    centre = rec.leg_centres.front();
  } else if (const auto legs = rec.result.find("legs");
             legs != rec.result.end() && legs->is_array() && legs->size() == 1) {
    const nlohmann::json& l = legs->front();
    centre.ok = l.value("centred", false);
    auto number = [&](const char* key) {
      const auto it = l.find(key);
      return it != l.end() && it->is_number() ? it->get<double>() : field_axis::kUnknown;
    };
    centre.centre_t = number("centre_t");
    centre.centre_err_t = number("centre_err_t");
    centre.rate_t_per_s = number("rate_t_per_s");
  }
  if (!centre.ok) return;
  auto previous = last_leg_.find(rec.temperature_run);
  if (!rec.from_store && previous != last_leg_.end() && previous->second.direction != leg.direction) {
    const bool up = leg.direction == segment::Direction::up;
    const field_axis::Split split =
        field_axis::split(up ? centre : previous->second.centre, up ? previous->second.centre : centre);
    auto number = [](double v) { return std::isfinite(v) ? nlohmann::json(v) : nlohmann::json(nullptr); };
    rec.result["remanent_field_t"] = number(split.remanent_field_t);
    rec.result["remanent_field_err_t"] = number(split.offset_err_t);
    rec.result["lag_field_t"] = number(split.opposite_t);
    rec.result["lag_field_err_t"] = number(split.opposite_err_t);
    rec.result["field_lag_s"] = number(split.delay_s);
    rec.result["field_lag_err_s"] = number(split.delay_err_s);
    rec.result["lag_partner_sweep_index"] = previous->second.sweep_index;
    const auto field = rec.result.find("characteristic_field_t");
    const double b_phi = field != rec.result.end() && field->is_number() ? field->get<double>() : 0.0;
    if (rec.ok && std::isfinite(split.opposite_t) && b_phi > 0.0 &&
        std::abs(split.opposite_t) > sweep::kOffsetAlertFraction * b_phi) {
      const double rate = split.rate_t_per_s;
      const std::string note = fmt::format(
          "the centres of this leg and sweep {} differ by {:.3g} mT ({:.2g} B_phi): a lag of {:.3g} s "
          "between the field reading and the lock-in, corrected leg by leg before the fit",
          previous->second.sweep_index, 2e3 * std::abs(split.opposite_t), 2.0 * std::abs(split.opposite_t) / b_phi,
          split.delay_s);
      rec.quality.push_back("field-lag: " + note);
      if (rec.result.value("advice", std::string()).empty() && std::isfinite(split.delay_s) &&
          std::abs(split.delay_s) > 0.0 && std::isfinite(rate)) {
        // A lag d shifts each leg by r d; below 0.1 B_phi it no longer matters.
        rec.result["advice"] = fmt::format(
            "the up and down sweeps lag by {:.2g} s: slow the sweep to {:.2g} mT/min near zero field",
            std::abs(split.delay_s), 0.1 * b_phi / std::abs(split.delay_s) * 6e4);
      }
    }
  }
  last_leg_[rec.temperature_run] = {leg.direction, centre, rec.sweep_index};
}

void SamplePipeline::update_zero_field(const FitRecord& fit, PipelineOutput& out) {
  if (!fit.sigma0_s || fit.temperature_unstable || !std::isfinite(*fit.sigma0_s)) return;
  auto& p = zero_field_[fit.temperature_run];
  p.cooldown = fit.cooldown;
  p.sigma_s.push_back(*fit.sigma0_s);
  p.sigma_err_s.push_back(fit.sigma0_err_s.value_or(0.0));
  p.temperature_k.push_back(fit.temperature_k);
  p.t_s = fit.t_s;
  ZeroFieldRecord r;
  r.temperature_run = fit.temperature_run;
  r.cooldown = fit.cooldown;
  r.n_sweeps = p.sigma_s.size();
  r.t_s = p.t_s;
  const double n = static_cast<double>(r.n_sweeps);
  double sum = 0.0, sum_err = 0.0, sum_t = 0.0;
  for (std::size_t i = 0; i < r.n_sweeps; ++i) {
    sum += p.sigma_s[i];
    sum_err += p.sigma_err_s[i];
    sum_t += p.temperature_k[i];
  }
  r.sigma_s = sum / n;
  r.temperature_k = sum_t / n;
  // The error of a mean of n estimates: their mean error / sqrt(n), or their
  // scatter / sqrt(n) when that is larger (the sweeps disagree beyond their
  // own errors, e.g. a slow drift of the plateau).
  double scatter = 0.0;
  if (r.n_sweeps > 1) {
    double ss = 0.0;
    for (double s : p.sigma_s) ss += (s - r.sigma_s) * (s - r.sigma_s);
    scatter = std::sqrt(ss / (n - 1.0));
  }
  r.sigma_err_s = std::max(sum_err / n, scatter) / std::sqrt(n);
  out.zero_field.push_back(r);
}

VerdictRecord SamplePipeline::assess(const FitRecord& trigger) const {
  const int dimension = model_dimension(settings_.model);
  std::vector<dephasing::LphiPoint> points;
  std::vector<double> alphas;
  double sum_rsq = 0.0;
  std::size_t n_rsq = 0;
  const FitRecord* coldest = nullptr;
  std::size_t n_fits = 0;  // of this cooldown
  for (const auto& f : fits_) {
    if (f.cooldown != trigger.cooldown) continue;
    ++n_fits;
    if (!f.used_in_dephasing) continue;
    points.push_back({f.temperature_k, f.lphi_m, scaled_lphi_error_m(f)});
    if (f.sigma0_s && *f.sigma0_s > 0.0) {
      sum_rsq += 1.0 / *f.sigma0_s;
      ++n_rsq;
    }
    const auto alpha = f.result.find("alpha");
    if (alpha != f.result.end() && alpha->is_number() &&
        std::find(f.flags.begin(), f.flags.end(), "alpha-held") == f.flags.end()) {
      alphas.push_back(alpha->get<double>());
    }
    if (coldest == nullptr || f.temperature_k < coldest->temperature_k) coldest = &f;
  }
  dephasing::DephasingOptions dopt;
  dopt.dimension = dimension;
  dopt.diffusion_m2s = settings_.diffusion_m2s;
  if (n_rsq > 0) {
    const double rsq = sum_rsq / static_cast<double>(n_rsq);
    if (dimension == 2) dopt.sheet_resistance_ohm = rsq;
    if (dimension == 1 && settings_.geometry.width_m > 0.0) {
      dopt.resistance_per_length_ohm_m = rsq / settings_.geometry.width_m;
    }
  }
  const dephasing::DephasingResult d = dephasing::fit_dephasing(points, dopt);

  std::vector<thermometry::ZeroFieldPoint> sigma0;
  for (const auto& [run, p] : zero_field_) {
    if (p.cooldown != trigger.cooldown) continue;
    const double n = static_cast<double>(p.sigma_s.size());
    double sum = 0.0, sum_t = 0.0, sum_err = 0.0, ss = 0.0;
    for (std::size_t i = 0; i < p.sigma_s.size(); ++i) {
      sum += p.sigma_s[i];
      sum_t += p.temperature_k[i];
      sum_err += p.sigma_err_s[i];
    }
    const double mean = sum / n;
    for (double s : p.sigma_s) ss += (s - mean) * (s - mean);
    const double scatter = p.sigma_s.size() > 1 ? std::sqrt(ss / (n - 1.0)) : 0.0;
    sigma0.push_back({sum_t / n, mean, std::max(sum_err / n, scatter) / std::sqrt(n)});
  }
  verdict::VerdictOptions vopt;
  vopt.dimension = dimension;
  if (settings_.alpha_fixed) {
    vopt.alpha = *settings_.alpha_fixed;
  } else if (settings_.model == mc::Model::hln2d && !alphas.empty()) {
    vopt.alpha = median(alphas);
  } else if (settings_.model == mc::Model::hln2d_so) {
    vopt.alpha = -0.5;  // strong spin-orbit scattering: antilocalization prefactor
  }
  const verdict::Verdict v = verdict::assess(d, sigma0, vopt);

  VerdictRecord r;
  r.sweep_index = trigger.sweep_index;
  r.cooldown = trigger.cooldown;
  r.t_s = trigger.t_s;
  r.state = std::string(dephasing::state_name(v.state));
  r.electrons_cooling = v.electrons_cooling;
  if (v.likely_cause) r.likely_cause = std::string(verdict::cause_name(*v.likely_cause));
  r.exponent_p = d.exponent_p;
  r.lphi_sat_m = d.lphi_sat_m;
  r.t_sat_k = d.t_sat_k;
  r.n_points = points.size();
  r.aak_ratio = d.aak_ratio;
  if (coldest != nullptr) {
    const auto regime = checks::dimensional_regime(coldest->lphi_m, settings_.geometry.width_m,
                                                   settings_.geometry.thickness_m, settings_.model,
                                                   settings_.diffusion_m2s.value_or(0.0),
                                                   coldest->temperature_k);
    if (regime.error.empty()) r.regime = std::string(checks::regime_name(regime.regime));
  }
  nlohmann::json j = schema::dephasing_json(d);
  j["state"] = r.state;  // the verdict's state (it equals the dephasing fit's)
  j["electrons_cooling"] = optional_bool_json(r.electrons_cooling);
  j["likely_cause"] = r.likely_cause ? nlohmann::json(*r.likely_cause) : nlohmann::json(nullptr);
  j["regime"] = r.regime ? nlohmann::json(*r.regime) : nlohmann::json(nullptr);
  j["updated_at"] = r.t_s;
  j["sweep_index"] = r.sweep_index;
  j["cooldown"] = r.cooldown;
  j["n_fits"] = n_fits;
  j["n_zero_field_points"] = sigma0.size();
  const auto& e = v.evidence;
  j["evidence"] = {{"t_sat_k", schema::optional_json(e.t_sat_k)},
                   {"t_sat_err_k", schema::optional_json(e.t_sat_err_k)},
                   {"t_floor_k", schema::optional_json(e.t_floor_k)},
                   {"t_floor_err_k", schema::optional_json(e.t_floor_err_k)},
                   {"floor_over_sat", schema::optional_json(e.floor_over_sat)},
                   {"thermometer_t_min_k", schema::optional_json(e.thermometer_t_min_k)},
                   {"interaction_slope_kappa", schema::optional_json(e.interaction_slope_kappa)},
                   {"interaction_slope_kappa_err", schema::optional_json(e.interaction_slope_kappa_err)},
                   {"departure_p_value", schema::optional_json(e.departure_p_value)},
                   {"weak_localization_removed", e.weak_localization_removed},
                   {"verdict_alpha", vopt.alpha}};
  j["verdict_notes"] = v.notes;
  if (!v.error.empty()) j["verdict_error"] = v.error;
  r.json = std::move(j);
  return r;
}

}  // namespace lphi::live
