// sample_settings: the one mapping from a configured [[sample]]
// (daemon/config/config.hpp) to the analysis settings of its SamplePipeline.
// A pure function; any thread.
#pragma once

#include "daemon/config/config.hpp"
#include "daemon/live/sample_pipeline.hpp"

namespace lphi::live {

// The analysis settings of one configured sample (the model's name is
// checked by the config; an unknown one falls back to hln2d).
SampleSettings sample_settings(const config::SampleConfig& sample);

}  // namespace lphi::live
