// Exposes the group stage to the reference scripts and prints a benchmark.
//   pool_probe run CONFIG [THREADS]   LoadGroupConfig + RunPool; diagnostics to stderr,
//                                     exit 1 on any error; one summary line per contrast.
//   pool_probe bench [VOXELS] [SUBJECTS] [THREADS]
//                                     times PoolVoxels (mixed) on simulated voxels and
//                                     prints voxels/s and REML iterations (median, max).
#include <algorithm>
#include <chrono>
#include <cstdio>
#include <ctime>
#include <random>
#include <string>

#include "boldsum/pool.h"

namespace {

int Run(const std::string& config, int threads) {
  const boldsum::LoadedGroupConfig loaded = boldsum::LoadGroupConfig(config);
  for (const boldsum::Diagnostic& d : loaded.diagnostics.all()) {
    std::fprintf(stderr, "%s\n", d.ToString().c_str());
  }
  if (loaded.diagnostics.HasErrors()) return 1;
  boldsum::PoolRunOptions options;
  options.threads = threads;
  const boldsum::PoolSummary summary = boldsum::RunPool(loaded.spec, options);
  for (const boldsum::PoolContrastSummary& s : summary.contrasts) {
    std::printf("%s: units %d fitted %d tau2=0 %d not_converged %d iterations median %d max %d\n",
                s.contrast.c_str(), s.units, s.units_valid, s.boundary, s.not_converged,
                s.iterations_median, s.iterations_max);
  }
  return 0;
}

// Voxels with 40 subjects (by default), an intercept and a centred covariate, first-level
// variances spread over a factor of ~5, and tau2 / mean(v) cycling through 0, 0.1, 1, 10.
int Bench(int voxels, int subjects, int threads) {
  std::mt19937_64 random(20240607);
  std::normal_distribution<double> normal;
  std::uniform_real_distribution<double> uniform(0.4, 2.0);
  Eigen::MatrixXd z(subjects, 2);
  for (int i = 0; i < subjects; ++i) z(i, 0) = 1, z(i, 1) = normal(random);
  z.col(1).array() -= z.col(1).mean();
  Eigen::MatrixXd y(subjects, voxels), v(subjects, voxels);
  const double ratios[] = {0.0, 0.1, 1.0, 10.0};
  for (int j = 0; j < voxels; ++j) {
    const double tau2 = ratios[j % 4];
    for (int i = 0; i < subjects; ++i) {
      v(i, j) = uniform(random);
      y(i, j) = 0.5 + 0.2 * z(i, 1) + std::sqrt(tau2 + v(i, j)) * normal(random);
    }
  }
  boldsum::GroupContrast mean{"mean", Eigen::MatrixXd(1, 2), false, {}};
  mean.weights << 1, 0;
  // Timed twice: the fit alone (no contrast), then with a t contrast and its z.
  // CPU time as well as wall time: on a busy machine the CPU figure is the steadier.
  auto start = std::chrono::steady_clock::now();
  std::clock_t cpu_start = std::clock();
  boldsum::PoolVoxels(z, y, v, {}, boldsum::PoolMethod::kMixed, threads);
  const double fit_seconds =
      std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
  const double fit_cpu = static_cast<double>(std::clock() - cpu_start) / CLOCKS_PER_SEC;
  start = std::chrono::steady_clock::now();
  cpu_start = std::clock();
  const boldsum::PooledMaps maps =
      boldsum::PoolVoxels(z, y, v, {mean}, boldsum::PoolMethod::kMixed, threads);
  const double seconds =
      std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
  const double cpu = static_cast<double>(std::clock() - cpu_start) / CLOCKS_PER_SEC;
  std::vector<int> iterations = maps.iterations;
  std::sort(iterations.begin(), iterations.end());
  int boundary = 0, not_converged = 0;
  for (int j = 0; j < voxels; ++j) {
    boundary += maps.tau2[j] == 0;
    not_converged += !maps.converged[j];
  }
  std::printf("mixed, %d subjects, k = 2, %d voxels, %d thread(s):\n", subjects, voxels,
              threads);
  std::printf("  fit only:      %8.0f voxels/s wall, %8.0f voxels per CPU-second\n",
              voxels / fit_seconds, voxels / fit_cpu);
  std::printf("  fit + t + z:   %8.0f voxels/s wall, %8.0f voxels per CPU-second\n",
              voxels / seconds, voxels / cpu);
  std::printf("REML iterations: median %d, 90th percentile %d, max %d (tau2 = 0 at %d voxels, "
              "not converged %d)\n",
              iterations[iterations.size() / 2], iterations[iterations.size() * 9 / 10],
              iterations.back(), boundary, not_converged);
  return 0;
}

}  // namespace

int main(int argc, char** argv) {
  const std::string mode = argc > 1 ? argv[1] : "";
  try {
    if (mode == "run" && argc >= 3) return Run(argv[2], argc > 3 ? std::stoi(argv[3]) : 1);
    if (mode == "bench") {
      return Bench(argc > 2 ? std::stoi(argv[2]) : 200000, argc > 3 ? std::stoi(argv[3]) : 40,
                   argc > 4 ? std::stoi(argv[4]) : 1);
    }
  } catch (const std::exception& e) {
    std::fprintf(stderr, "pool_probe: %s\n", e.what());
    return 1;
  }
  std::fprintf(stderr, "usage: pool_probe run CONFIG [THREADS] | bench [VOXELS] [SUBJECTS] "
                       "[THREADS]\n");
  return 2;
}
