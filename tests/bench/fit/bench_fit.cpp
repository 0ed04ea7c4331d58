// Benchmarks of the one-sweep fit and of the model evaluations it is made of.
//
// The sweep: HLN weak localization, L_phi = 200 nm (B_phi = 4.1 mT),
// alpha = 1, R_sq = 1 kohm, 1999 readings from -80 mT to +80 mT with
// 0.05 ohm noise, symmetrized to 1000 points. The automatic window
// (20 B_phi = 82 mT) then holds all of them.
//
//   bench_fit [--fit-data=FILE] [Google Benchmark flags]
// --fit-data writes the 1000 prepared points (field_t, delta_sigma_s) as CSV
// for tests/bench/fit/scipy_fit.py, so that both fit identical data.
#include <benchmark/benchmark.h>

#include <cstdio>
#include <cstring>
#include <string>
#include <vector>

#include "analysis/conductance.hpp"
#include "analysis/magnetoconductance.hpp"
#include "analysis/internal/special_functions.hpp"
#include "analysis/sweep_fit.hpp"
#include "analysis/synthetic.hpp"

namespace {

const lphi::conductance::PreparedSweep& benchmark_sweep() {
  static const lphi::conductance::PreparedSweep sweep = [] {
    lphi::synthetic::SweepTruth truth;
    truth.model = lphi::mc::Model::hln2d;
    truth.lphi_m = 200e-9;
    truth.alpha = 1.0;
    truth.rsq0_ohm = 1000.0;
    lphi::synthetic::SweepPlan plan;
    plan.max_field_t = 0.08;
    plan.n_points = 1999;
    plan.noise_rsq_ohm = 0.05;
    plan.seed = 1;
    std::vector<lphi::conductance::FieldPoint> raw;
    for (const auto& p : lphi::synthetic::make_sweep(truth, plan))
      raw.push_back({p.field_t, p.rsq_ohm});
    lphi::conductance::PreparedSweep out;
    const auto status = lphi::conductance::prepare_sweep(raw, out);
    if (!status.ok) std::fprintf(stderr, "bench_fit: %s\n", status.error.c_str());
    return out;
  }();
  return sweep;
}

std::vector<double> fields() {
  std::vector<double> b;
  for (const auto& p : benchmark_sweep().points) b.push_back(p.field_t);
  return b;
}

// One complete HLN fit: start grid, automatic window, LM, covariance, flags.
void BM_FitHln1000(benchmark::State& state) {
  const auto& sweep = benchmark_sweep();
  const lphi::fit::SweepFitOptions options;
  lphi::fit::SweepFitResult r;
  for (auto _ : state) {
    r = lphi::fit::fit_sweep(sweep.points, options);
    benchmark::DoNotOptimize(
        r);  // the whole result: a register constraint on one double can corrupt it
  }
  state.counters["points"] = static_cast<double>(r.n_points);
  state.counters["iterations"] = r.iterations;
  state.counters["lphi_nm"] = r.lphi_m * 1e9;
  state.counters["alpha"] = r.alpha.value_or(0.0);
}
BENCHMARK(BM_FitHln1000)->Unit(benchmark::kMicrosecond);

// The same with the window given, so no window iteration can happen.
void BM_FitHln1000FixedWindow(benchmark::State& state) {
  const auto& sweep = benchmark_sweep();
  lphi::fit::SweepFitOptions options;
  options.window_t = 0.08;
  for (auto _ : state) {
    lphi::fit::SweepFitResult r = lphi::fit::fit_sweep(sweep.points, options);
    benchmark::DoNotOptimize(r);
  }
}
BENCHMARK(BM_FitHln1000FixedWindow)->Unit(benchmark::kMicrosecond);

void BM_ModelHlnValue1000(benchmark::State& state) {
  const std::vector<double> b = fields();
  for (auto _ : state) {
    double sum = 0.0;
    for (double x : b) sum += lphi::mc::hln2d(x, 1.0, 200e-9);
    benchmark::DoNotOptimize(sum);
  }
}
BENCHMARK(BM_ModelHlnValue1000)->Unit(benchmark::kMicrosecond);

void BM_ModelHlnGradient1000(benchmark::State& state) {
  const std::vector<double> b = fields();
  for (auto _ : state) {
    double sum = 0.0;
    for (double x : b) {
      const auto g = lphi::mc::hln2d_grad(x, 1.0, 200e-9);
      sum += g.value + g.d_ln_lphi + g.d_alpha;
    }
    benchmark::DoNotOptimize(sum);
  }
}
BENCHMARK(BM_ModelHlnGradient1000)->Unit(benchmark::kMicrosecond);

// psi(1/2 + B_phi/B) at the sweep's fields, the argument the HLN model needs.
void BM_Digamma1000(benchmark::State& state) {
  std::vector<double> arg;
  const double b_phi = lphi::mc::characteristic_field_t(200e-9);
  for (double x : fields()) arg.push_back(0.5 + (x > 0 ? b_phi / x : 1e6));
  for (auto _ : state) {
    double sum = 0.0;
    for (double a : arg) sum += lphi::special::digamma(a);
    benchmark::DoNotOptimize(sum);
  }
}
BENCHMARK(BM_Digamma1000)->Unit(benchmark::kMicrosecond);

bool write_csv(const std::string& path) {
  std::FILE* f = std::fopen(path.c_str(), "w");
  if (f == nullptr) return false;
  std::fprintf(f, "field_t,delta_sigma_s\n");
  for (const auto& p : benchmark_sweep().points)
    std::fprintf(f, "%.17g,%.17g\n", p.field_t, p.delta_sigma_s);
  return std::fclose(f) == 0;
}

}  // namespace

int main(int argc, char** argv) {
  std::vector<char*> args;
  for (int i = 0; i < argc; ++i) {
    constexpr const char* flag = "--fit-data=";
    if (std::strncmp(argv[i], flag, std::strlen(flag)) == 0) {
      if (!write_csv(argv[i] + std::strlen(flag))) {
        std::fprintf(stderr, "bench_fit: cannot write %s\n", argv[i] + std::strlen(flag));
        return 2;
      }
      continue;
    }
    args.push_back(argv[i]);
  }
  int n = static_cast<int>(args.size());
  benchmark::Initialize(&n, args.data());
  if (benchmark::ReportUnrecognizedArguments(n, args.data())) return 1;
  benchmark::RunSpecifiedBenchmarks();
  benchmark::Shutdown();
  return 0;
}
