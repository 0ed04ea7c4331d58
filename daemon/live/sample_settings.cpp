#include "daemon/live/sample_settings.hpp"

namespace lphi::live {

SampleSettings sample_settings(const config::SampleConfig& c) {
  SampleSettings s;
  s.name = c.name;
  s.model = mc::model_from_name(c.model).value_or(mc::Model::hln2d);
  s.geometry.squares = c.squares;
  s.geometry.width_m = c.width_m;
  s.geometry.thickness_m = c.thickness_m;
  s.geometry.mean_free_path_m = c.mean_free_path_m.value_or(0.0);
  s.excitation_a = c.excitation_a;
  s.gain = c.gain.value_or(1.0);
  s.diffusion_m2s = c.diffusion_m2s;
  s.alpha_fixed = c.alpha_fixed;
  s.probe_length_m = c.probe_length_m;
  s.fit_window_t = c.fit_window_t;
  s.fit_background = c.fit_background;
  s.combine_up_down = c.combine_up_down;
  s.aligner.max_age_temperature_s = c.max_age_temperature_s;
  s.aligner.max_age_field_s = c.max_age_field_s;
  s.aligner.max_hold_s = c.max_hold_s;
  s.segmenter.min_span_t = c.sweep_min_span_t;
  s.segmenter.reversal_tolerance_t = c.reversal_tolerance_t;
  s.segmenter.min_points = static_cast<std::size_t>(c.sweep_min_points);
  s.segmenter.field_step_t = c.field_step_t;
  s.segmenter.plateau.relative_spread = c.plateau_relative_spread;
  s.segmenter.plateau.min_duration_s = c.plateau_min_duration_s;
  s.segmenter.settling_time_constants = c.settling_time_constants;
  s.segmenter.settling_unknown_tau_s = c.settling_unknown_tau_s;
  s.heating.max_ratio = c.excitation_ratio_max;
  s.lockin.max_quadrature_ratio = c.quadrature_ratio_max;
  s.new_cooldown_above_k = c.new_cooldown_above_k;
  return s;
}

}  // namespace lphi::live
