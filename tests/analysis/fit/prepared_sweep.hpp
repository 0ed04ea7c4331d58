// For the fit tests: a synthetic sweep (analysis/synthetic.hpp) prepared as
// the fit takes it (R_sq -> Delta sigma, symmetrized), failing the test if
// preparing it fails.
#pragma once

#include <gtest/gtest.h>

#include <vector>

#include "analysis/conductance.hpp"
#include "analysis/synthetic.hpp"

namespace lphi::testing {

inline conductance::PreparedSweep prepared(const synthetic::SweepTruth& truth,
                                           const synthetic::SweepPlan& plan) {
  std::vector<conductance::FieldPoint> raw;
  for (const auto& p : synthetic::make_sweep(truth, plan)) raw.push_back({p.field_t, p.rsq_ohm});
  conductance::PreparedSweep out;
  EXPECT_TRUE(conductance::prepare_sweep(raw, out).ok);
  return out;
}

}  // namespace lphi::testing
