#include "analysis/conductance.hpp"
