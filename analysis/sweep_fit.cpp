#include "analysis/sweep_fit.hpp"
