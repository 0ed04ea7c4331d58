#include "analysis/synthetic.hpp"
