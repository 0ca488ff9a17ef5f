#include <algorithm>
#include <atomic>
#include <cmath>
#include <exception>
#include <limits>
#include <mutex>
#include <thread>

#include "boldsum/pool.h"
#include "boldsum/stats.h"
#include "pool/pooled_fitter.h"

namespace boldsum {
namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
// Voxels per work item. Fixed, so the split never depends on the thread count (each
// voxel is computed alone anyway; the fixed split keeps the work order reproducible).
constexpr int kChunkVoxels = 2048;

void EvaluateContrasts(const PooledFit& fit, const std::vector<GroupContrast>& contrasts,
                       int k, Eigen::Index voxel, PooledMaps* maps) {
  for (size_t c = 0; c < contrasts.size(); ++c) {
    PooledContrastMaps& out = maps->contrasts[c];
    const Eigen::MatrixXd& weights = contrasts[c].weights;
    if (!fit.valid) continue;  // all NaN already
    const double dof = fit.n - k;
    out.dof[voxel] = dof;
    if (!contrasts[c].is_f) {
      const double estimate = weights.row(0).dot(fit.beta);
      const double variance = weights.row(0) * fit.covariance * weights.row(0).transpose();
      out.estimate[voxel] = estimate;
      out.variance[voxel] = variance;
      if (variance > 0) {
        const double t = estimate / std::sqrt(variance);
        out.stat[voxel] = t;
        out.z[voxel] = ZFromT(t, dof);
      }
    } else {
      // F = (C beta)' (C Cov C')^-1 (C beta) / q with (q, n - k) dof.
      const Eigen::VectorXd effect = weights * fit.beta;
      const Eigen::MatrixXd cov = weights * fit.covariance * weights.transpose();
      const Eigen::LLT<Eigen::MatrixXd> llt(cov);
      if (llt.info() != Eigen::Success) continue;
      const double q = static_cast<double>(weights.rows());
      const double f = effect.dot(llt.solve(effect)) / q;
      out.stat[voxel] = f;
      out.z[voxel] = ZFromF(f, q, dof);
    }
  }
}

}  // namespace

PooledMaps PoolVoxels(const Eigen::MatrixXd& z, const Eigen::MatrixXd& estimates,
                      const Eigen::MatrixXd& variances,
                      const std::vector<GroupContrast>& contrasts, PoolMethod method,
                      int threads, const RemlOptions& options) {
  const Eigen::Index n = z.rows(), k = z.cols(), voxels = estimates.cols();
  if (estimates.rows() != n || variances.rows() != n || variances.cols() != voxels) {
    throw Error("PoolVoxels: design has " + std::to_string(n) + " rows; estimates are " +
                std::to_string(estimates.rows()) + " x " + std::to_string(estimates.cols()) +
                ", variances " + std::to_string(variances.rows()) + " x " +
                std::to_string(variances.cols()));
  }
  for (const GroupContrast& contrast : contrasts) {
    if (contrast.weights.cols() != k || contrast.weights.rows() < 1 ||
        (!contrast.is_f && contrast.weights.rows() != 1)) {
      throw Error("PoolVoxels: contrast '" + contrast.name + "' has " +
                  std::to_string(contrast.weights.rows()) + " x " +
                  std::to_string(contrast.weights.cols()) + " weights for " +
                  std::to_string(k) + " design columns");
    }
  }
  PooledMaps maps;
  maps.n.setZero(voxels);
  maps.tau2.setConstant(voxels, kNaN);
  maps.sigma2.setConstant(voxels, kNaN);
  maps.iterations.assign(voxels, 0);
  maps.converged.assign(voxels, 1);
  maps.contrasts.resize(contrasts.size());
  for (PooledContrastMaps& c : maps.contrasts) {
    for (Eigen::VectorXd* map : {&c.estimate, &c.variance, &c.stat, &c.z, &c.dof}) {
      map->setConstant(voxels, kNaN);
    }
  }

  const Eigen::Index chunks = (voxels + kChunkVoxels - 1) / kChunkVoxels;
  std::atomic<Eigen::Index> next_chunk{0};
  auto fit_chunks = [&]() {
    PooledFitter fitter(z, method, options);
    PooledFit fit;
    for (Eigen::Index chunk = next_chunk++; chunk < chunks; chunk = next_chunk++) {
      const Eigen::Index end = std::min(voxels, (chunk + 1) * kChunkVoxels);
      for (Eigen::Index voxel = chunk * kChunkVoxels; voxel < end; ++voxel) {
        fitter.Fit(estimates.col(voxel).data(), variances.col(voxel).data(), &fit);
        maps.n[voxel] = fit.n;
        if (!fit.valid) continue;
        maps.tau2[voxel] = fit.tau2;
        maps.sigma2[voxel] = fit.sigma2;
        maps.iterations[voxel] = fit.iterations;
        maps.converged[voxel] = fit.converged ? 1 : 0;
        EvaluateContrasts(fit, contrasts, static_cast<int>(k), voxel, &maps);
      }
    }
  };
  std::mutex failure_mutex;
  std::exception_ptr failure;
  auto work = [&]() noexcept {
    try {
      fit_chunks();
    } catch (...) {
      const std::lock_guard<std::mutex> lock(failure_mutex);
      if (!failure) failure = std::current_exception();
      next_chunk = chunks;  // the other threads stop at their next chunk
    }
  };
  const int wanted =
      threads > 0 ? threads : static_cast<int>(std::thread::hardware_concurrency());
  const int workers =
      static_cast<int>(std::clamp<Eigen::Index>(wanted, 1, std::max<Eigen::Index>(1, chunks)));
  if (workers == 1) {
    work();
  } else {
    std::vector<std::thread> pool;
    for (int t = 0; t < workers; ++t) pool.emplace_back(work);
    for (std::thread& thread : pool) thread.join();
  }
  if (failure) std::rethrow_exception(failure);
  return maps;
}

}  // namespace boldsum
