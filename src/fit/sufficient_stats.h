// One pass over a run's data, in blocks of volumes, collecting per voxel the sums from
// which OLS, the AR(1) estimate and the exact GLS follow without a second pass.
#pragma once

#include <Eigen/Dense>

#include "boldsum/fit.h"
#include "fit/design_basis.h"

namespace boldsum {
namespace fit {

// Per voxel v, with y = data(:, v) - offset(v) (the offset is the voxel's first value
// when the design spans the constant, else 0) and D = L + L':
//   g(:, v)  = [X_k V, D X_k V]' y  (2r rows: V'X_k'y, then V'X_k'D y; V of design_basis.h)
//   yy(v)    = y'y,   ydy(v) = y'D y = 2 sum_k y_k y_{k-1}
//   first(v) = y_0,   last(v) = y_{N-1}
// All sums are accumulated in double. A voxel with a NaN or Inf anywhere has a
// non-finite yy (or offset).
struct SufficientStats {
  Eigen::MatrixXd g;
  Eigen::VectorXd yy, ydy, first, last, offset;
};

// How float blocks are accumulated: kAuto takes the AVX2+FMA kernel when the CPU has
// it (checked at run time), else Eigen's portable GEMM; kPortable always the latter
// (for comparing the two in tests). Double blocks (ROI tables) always take Eigen's.
// Either way a voxel's arithmetic does not depend on its neighbours or on `threads`.
enum class StatsKernel { kAuto, kPortable };

// Reads every block of `source` once, on threads - source->BackgroundThreads() threads
// (at least one). Throws Error when the source's shape disagrees with the design
// (volumes) or a block's width differs from n_voxels().
SufficientStats AccumulateStats(const DesignBasis& basis, BlockSource* source, int threads,
                                StatsKernel kernel = StatsKernel::kAuto);

}  // namespace fit
}  // namespace boldsum
