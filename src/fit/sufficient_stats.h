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
//   g(:, v)  = [X_k, D X_k]' y      (2r rows: X_k'y, then X_k'D y)
//   yy(v)    = y'y,   ydy(v) = y'D y = 2 sum_k y_k y_{k-1}
//   first(v) = y_0,   last(v) = y_{N-1}
// All sums are accumulated in double. A voxel with a NaN or Inf anywhere has a
// non-finite yy (or offset).
struct SufficientStats {
  Eigen::MatrixXd g;
  Eigen::VectorXd yy, ydy, first, last, offset;
};

// Reads every block of `source` once. Throws Error when the source's shape disagrees
// with the design (volumes) or a block's width differs from n_voxels().
SufficientStats AccumulateStats(const DesignBasis& basis, BlockSource* source,
                                int threads);

}  // namespace fit
}  // namespace boldsum
