#include "analysis/thermometry.hpp"
