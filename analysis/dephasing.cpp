#include "analysis/dephasing.hpp"
