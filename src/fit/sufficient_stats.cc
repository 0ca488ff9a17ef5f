#include "fit/sufficient_stats.h"

#include <string>

#include "boldsum/error.h"
#include "fit/parallel.h"

namespace boldsum {
namespace fit {

SufficientStats AccumulateStats(const DesignBasis& basis, BlockSource* source,
                                int threads) {
  const Eigen::Index n_vox = source->n_voxels();
  if (source->n_volumes() != basis.n) {
    throw Error("data has " + std::to_string(source->n_volumes()) +
                " volumes but the design has " + std::to_string(basis.n) + " rows");
  }
  if (n_vox < 1) throw Error("data has no voxels");
  const Eigen::Index two_r = basis.z.cols();
  SufficientStats s;
  s.g = Eigen::MatrixXd::Zero(two_r, n_vox);
  s.yy = Eigen::VectorXd::Zero(n_vox);
  s.ydy = Eigen::VectorXd::Zero(n_vox);
  s.first = Eigen::VectorXd::Zero(n_vox);
  s.last = Eigen::VectorXd::Zero(n_vox);  // the previous volume while accumulating
  s.offset = Eigen::VectorXd::Zero(n_vox);

  Eigen::Index row0 = 0;
  // One block of volumes, float (images) or double (ROI tables).
  const auto accumulate = [&](const auto& block) {
    const Eigen::Index rows = block.rows();
    if (block.cols() != n_vox) {
      throw Error("data block at volume " + std::to_string(row0) + " has " +
                  std::to_string(block.cols()) + " voxels; expected " +
                  std::to_string(n_vox));
    }
    if (rows == 0) return;
    if (row0 + rows > basis.n) {
      throw Error("data has more volumes than the " + std::to_string(basis.n) +
                  " it declares");
    }
    const bool is_first = row0 == 0;
    ForEachChunk(n_vox, threads, [&](Eigen::Index v0, Eigen::Index v1) {
      const Eigen::Index w = v1 - v0;
      if (is_first && basis.has_constant) {
        s.offset.segment(v0, w) = block.block(0, v0, 1, w).template cast<double>().transpose();
      }
      Eigen::MatrixXd y = block.middleCols(v0, w).template cast<double>();
      y.rowwise() -= s.offset.segment(v0, w).transpose();
      s.g.middleCols(v0, w).noalias() += basis.z.middleRows(row0, rows).transpose() * y;
      s.yy.segment(v0, w) += y.colwise().squaredNorm().transpose();
      auto ydy = s.ydy.segment(v0, w);
      if (rows > 1) {
        ydy += 2.0 * y.topRows(rows - 1).cwiseProduct(y.bottomRows(rows - 1))
                         .colwise().sum().transpose();
      }
      if (is_first) {
        s.first.segment(v0, w) = y.row(0).transpose();
      } else {
        ydy += 2.0 * s.last.segment(v0, w).cwiseProduct(y.row(0).transpose());
      }
      s.last.segment(v0, w) = y.row(rows - 1).transpose();
    });
    row0 += rows;
  };
  if (source->ProvidesDoubles()) {
    Eigen::MatrixXd block;
    while (source->NextDouble(&block)) accumulate(block);
  } else {
    Eigen::MatrixXf block;
    while (source->Next(&block)) accumulate(block);
  }
  if (row0 != basis.n) {
    throw Error("data ended after " + std::to_string(row0) + " of " +
                std::to_string(basis.n) + " volumes");
  }
  return s;
}

}  // namespace fit
}  // namespace boldsum
