// Start values of the sweep fit (analysis/sweep_fit.hpp): the lengths from a
// grid of characteristic fields, the parameters that enter linearly (alpha
// when free, offset, background) solved exactly at each grid point. Internal
// to the fit.
#pragma once

#include <cstddef>
#include <vector>

#include "analysis/internal/sweep_fit_function.hpp"

namespace lphi::fit::detail {

// Data-driven start: a grid of characteristic fields from field_lo/2 to
// 2 field_hi by factors of 2 for each length, the linear parameters solved
// exactly at each grid point on a subsample of at most kGridSubsample
// points, then a parabolic refinement of the best point along each length.
// Returns the full parameter vector in layout l.
std::vector<double> grid_start(const Shape& shape, const Layout& l, const Data& d, double field_lo,
                               double field_hi);

// theta expressed in a layout for new data or a new alpha decision: lengths
// carried over, linear parameters solved afresh (on the grid's subsample;
// LM refines them).
std::vector<double> relayout(const Shape& shape, const Layout& from, const Layout& to,
                             const Data& d, const std::vector<double>& theta);

}  // namespace lphi::fit::detail
