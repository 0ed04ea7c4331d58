#include "analysis/special_functions.hpp"
