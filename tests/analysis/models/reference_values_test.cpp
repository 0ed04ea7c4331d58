// lphi's special functions and models against 50-digit mpmath values.
//
// tests/analysis/models/reference_values.csv is written by make_reference_values.py
// from the published formulas evaluated literally with mpmath (python3-mpmath)
// at >= 50 significant digits; derivatives there are mpmath's numerical
// derivatives of those formulas. Each row carries the size the error is
// measured against: |value|, or for functions that change sign the sum of the
// magnitudes of the terms that are added (a relative error is meaningless at
// a zero crossing, and double arithmetic cannot do better than that), or 0
// for an exact zero.
//
// Tolerance: 1e-10 of that size, the accuracy lphi's header promises. The
// double-precision floor is ~1e-16 times the cancellation the formula forces,
// so 1e-10 leaves room for the worst honest case (the direct bracket just
// below the crossover, ~1e-13) while catching any wrong term or branch.
#include <gtest/gtest.h>

#include <cmath>
#include <fstream>
#include <functional>
#include <map>
#include <sstream>
#include <string>
#include <vector>

#include "analysis/magnetoconductance.hpp"
#include "analysis/internal/special_functions.hpp"

namespace {

using namespace lphi;

struct Row {
  std::string function;
  double a[4] = {0, 0, 0, 0};
  double value = 0.0;
  double scale = 0.0;
  int line = 0;
};

std::vector<Row> read_rows() {
  const std::string path = std::string(LPHI_SOURCE_DIR) + "/tests/analysis/models/reference_values.csv";
  std::ifstream in(path);
  EXPECT_TRUE(in.good()) << "cannot open " << path;
  std::vector<Row> rows;
  std::string line;
  int number = 0;
  while (std::getline(in, line)) {
    ++number;
    if (line.empty() || line[0] == '#' || line.rfind("function,", 0) == 0) continue;
    std::stringstream fields(line);
    Row r;
    r.line = number;
    std::string cell;
    std::getline(fields, r.function, ',');
    for (double& a : r.a) {
      std::getline(fields, cell, ',');
      a = std::stod(cell);
    }
    std::getline(fields, cell, ',');
    r.value = std::stod(cell);
    std::getline(fields, cell, ',');
    r.scale = std::stod(cell);
    rows.push_back(r);
  }
  return rows;
}

using Evaluator = std::function<double(const double*)>;

const std::map<std::string, Evaluator>& evaluators() {
  static const std::map<std::string, Evaluator> table = {
      {"wl_bracket", [](const double* a) { return special::wl_bracket(a[0]); }},
      {"wl_bracket_derivative", [](const double* a) { return special::wl_bracket_derivative(a[0]); }},
      // The two-argument form (ln x supplied, its own digamma and trigamma
      // recurrences) against the same rows: its log slope divided by x is
      // the derivative.
      {"wl_bracket_with_log",
       [](const double* a) { return special::wl_bracket_and_log_slope(a[0], std::log(a[0])).value; }},
      {"wl_bracket_derivative_with_log",
       [](const double* a) {
         return special::wl_bracket_and_log_slope(a[0], std::log(a[0])).log_slope / a[0];
       }},
      {"hurwitz_zeta_half", [](const double* a) { return special::hurwitz_zeta_half(a[0]); }},
      {"kawabata_f3", [](const double* a) { return special::kawabata_f3(a[0]); }},
      {"kawabata_f3_derivative", [](const double* a) { return special::kawabata_f3_derivative(a[0]); }},
      {"hln2d", [](const double* a) { return mc::hln2d(a[0], a[1], a[2]); }},
      {"hln2d_d_ln_lphi", [](const double* a) { return mc::hln2d_grad(a[0], a[1], a[2]).d_ln_lphi; }},
      {"hln2d_d_alpha", [](const double* a) { return mc::hln2d_grad(a[0], a[1], a[2]).d_alpha; }},
      {"hln2d_so", [](const double* a) { return mc::hln2d_so(a[0], a[1], a[2]); }},
      {"hln2d_so_d_ln_lphi", [](const double* a) { return mc::hln2d_so_grad(a[0], a[1], a[2]).d_ln_lphi; }},
      {"hln2d_so_d_ln_lso", [](const double* a) { return mc::hln2d_so_grad(a[0], a[1], a[2]).d_ln_lso; }},
      {"wire1d", [](const double* a) { return mc::wire1d(a[0], a[1], a[2]); }},
      {"wire1d_d_ln_lphi", [](const double* a) { return mc::wire1d_grad(a[0], a[1], a[2]).d_ln_lphi; }},
      {"wire1d_so", [](const double* a) { return mc::wire1d_so(a[0], a[1], a[2], a[3]); }},
      {"wire1d_so_d_ln_lphi",
       [](const double* a) { return mc::wire1d_so_grad(a[0], a[1], a[2], a[3]).d_ln_lphi; }},
      {"wire1d_so_d_ln_lso",
       [](const double* a) { return mc::wire1d_so_grad(a[0], a[1], a[2], a[3]).d_ln_lso; }},
      {"kawabata3d", [](const double* a) { return mc::kawabata3d(a[0], a[1], a[2]); }},
      {"kawabata3d_d_ln_lphi",
       [](const double* a) { return mc::kawabata3d_grad(a[0], a[1], a[2]).d_ln_lphi; }},
  };
  return table;
}

// The values that the gradient functions return must be the plain values.
const std::map<std::string, Evaluator>& grad_values() {
  static const std::map<std::string, Evaluator> table = {
      {"hln2d", [](const double* a) { return mc::hln2d_grad(a[0], a[1], a[2]).value; }},
      {"hln2d_so", [](const double* a) { return mc::hln2d_so_grad(a[0], a[1], a[2]).value; }},
      {"wire1d", [](const double* a) { return mc::wire1d_grad(a[0], a[1], a[2]).value; }},
      {"wire1d_so", [](const double* a) { return mc::wire1d_so_grad(a[0], a[1], a[2], a[3]).value; }},
      {"kawabata3d", [](const double* a) { return mc::kawabata3d_grad(a[0], a[1], a[2]).value; }},
  };
  return table;
}

constexpr double tolerance = 1e-10;

TEST(ReferenceValues, EveryRowWithinTolerance) {
  const std::vector<Row> rows = read_rows();
  // Generated with ~6000 rows; a truncated file must not pass quietly.
  ASSERT_GT(rows.size(), 5000u);
  std::map<std::string, double> worst;
  std::map<std::string, int> counts;
  for (const Row& r : rows) {
    const auto it = evaluators().find(r.function);
    ASSERT_NE(it, evaluators().end()) << "unknown function '" << r.function << "' on line " << r.line;
    const double got = it->second(r.a);
    ++counts[r.function];
    if (r.scale == 0.0) {
      EXPECT_EQ(got, 0.0) << r.function << " line " << r.line << " must be exactly 0";
      continue;
    }
    const double err = std::fabs(got - r.value) / r.scale;
    worst[r.function] = std::max(worst[r.function], err);
    EXPECT_LE(err, tolerance) << r.function << "(" << r.a[0] << ", " << r.a[1] << ", " << r.a[2]
                              << ", " << r.a[3] << ") = " << got << ", reference " << r.value
                              << " (line " << r.line << ")";
    if (r.function == "wl_bracket" || r.function == "wl_bracket_derivative") {
      const std::string alias = r.function == "wl_bracket" ? "wl_bracket_with_log"
                                                            : "wl_bracket_derivative_with_log";
      const double with_log = evaluators().at(alias)(r.a);
      ++counts[alias];
      const double err_with_log = std::fabs(with_log - r.value) / r.scale;
      worst[alias] = std::max(worst[alias], err_with_log);
      EXPECT_LE(err_with_log, tolerance) << alias << "(" << r.a[0] << ") = " << with_log
                                         << ", reference " << r.value << " (line " << r.line << ")";
    }
    const auto g = grad_values().find(r.function);
    if (g != grad_values().end()) {
      const double via_grad = g->second(r.a);
      EXPECT_LE(std::fabs(via_grad - r.value) / r.scale, tolerance)
          << r.function << "_grad value, line " << r.line;
    }
  }
  // Every function listed must have been exercised.
  for (const auto& [name, _] : evaluators()) EXPECT_GT(counts[name], 0) << name;
  for (const auto& [name, err] : worst) {
    std::cout << "  worst error / scale  " << name << ": " << err << "  (" << counts[name] << " rows)\n";
  }
}

}  // namespace
