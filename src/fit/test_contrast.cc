// TestContrast: t or F, and z through the upper tail (stats.h), per voxel.
#include <cmath>
#include <limits>
#include <string>

#include "boldsum/error.h"
#include "boldsum/fit.h"
#include "boldsum/stats.h"
#include "fit/parallel.h"

namespace boldsum {

ContrastTest TestContrast(const ContrastEstimate& estimate, bool is_f, int threads) {
  constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
  if (threads < 1) {
    throw Error("TestContrast: threads = " + std::to_string(threads) +
                "; it must be at least 1");
  }
  const Eigen::Index q = estimate.q;
  if (!is_f && q != 1) {
    throw Error("a t test needs a one-row contrast; this one has " + std::to_string(q) +
                " rows (use an F test)");
  }
  const Eigen::Index n_vox = static_cast<Eigen::Index>(estimate.valid.size());
  ContrastTest out;
  out.stat = Eigen::VectorXd::Constant(n_vox, kNaN);
  out.z = Eigen::VectorXd::Constant(n_vox, kNaN);
  if (!estimate.estimable) return out;
  if (estimate.effect.rows() != q || estimate.effect.cols() != n_vox ||
      estimate.covariance.rows() != q * q || estimate.covariance.cols() != n_vox) {
    throw Error("TestContrast: effect and covariance shapes do not match q and the voxels");
  }
  fit::ForEachChunk(n_vox, threads, [&](Eigen::Index v0, Eigen::Index v1) {
    Eigen::MatrixXd cov(q, q);
    Eigen::VectorXd e(q);
    for (Eigen::Index v = v0; v < v1; ++v) {
      if (!estimate.valid[static_cast<size_t>(v)]) continue;
      if (!is_f) {
        const double t = estimate.effect(0, v) / std::sqrt(estimate.covariance(0, v));
        out.stat(v) = t;
        out.z(v) = ZFromT(t, estimate.dof);
        continue;
      }
      // F = e' Cov^-1 e / q.
      cov = Eigen::Map<const Eigen::MatrixXd>(estimate.covariance.col(v).data(), q, q);
      e = estimate.effect.col(v);
      Eigen::LLT<Eigen::Ref<Eigen::MatrixXd>> llt(cov);
      if (llt.info() != Eigen::Success) continue;
      llt.matrixL().solveInPlace(e);
      const double f = e.squaredNorm() / static_cast<double>(q);
      out.stat(v) = f;
      out.z(v) = ZFromF(f, static_cast<double>(q), estimate.dof);
    }
  });
  return out;
}

}  // namespace boldsum
