#include "analysis/magnetoconductance.hpp"
