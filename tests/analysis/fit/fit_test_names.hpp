// The short names the fit tests use for analysis/'s namespaces, and their
// shared prepared sweep (prepared_sweep.hpp).
#pragma once

#include "analysis/conductance.hpp"
#include "analysis/magnetoconductance.hpp"
#include "analysis/sweep_fit.hpp"
#include "analysis/synthetic.hpp"
#include "tests/analysis/fit/prepared_sweep.hpp"

namespace lc = lphi::conductance;
namespace lf = lphi::fit;
namespace ls = lphi::synthetic;
using lphi::mc::Model;
using lphi::testing::prepared;
