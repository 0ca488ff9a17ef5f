// PoolVoxels: the batch over voxels (threads, per-voxel dropping, contrasts).
#include <gtest/gtest.h>

#include <cmath>
#include <cstring>
#include <limits>
#include <random>

#include "boldsum/pool.h"
#include "boldsum/stats.h"
#include "pool_test_util.h"

namespace boldsum {
namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

struct Batch {
  Eigen::MatrixXd z, y, v;
  std::vector<GroupContrast> contrasts;
};

// 5000 voxels (more than two work chunks) of 25 subjects, tau2 from 0 to 5, with
// missing subjects scattered over some voxels and a few voxels with n <= k.
Batch MakeBatch() {
  std::mt19937_64 random(11);
  Batch batch;
  const int n = 25, voxels = 5000;
  batch.z = RandomDesign(n, 3, &random);
  batch.y.resize(n, voxels);
  batch.v.resize(n, voxels);
  for (int j = 0; j < voxels; ++j) {
    batch.v.col(j) = RandomVariances(n, &random);
    batch.y.col(j) = RandomEstimates(batch.z, batch.v.col(j), (j % 6) * 1.0, &random);
    if (j % 7 == 0) batch.y(j % n, j) = kNaN;
    if (j % 11 == 0) batch.v((j + 3) % n, j) = 0.0;
    if (j % 997 == 0) batch.y.col(j).tail(n - 3).setConstant(kNaN);  // n = 3 = k
  }
  GroupContrast mean{"mean", Eigen::MatrixXd(1, 3), false, {}};
  mean.weights << 1, 0, 0;
  GroupContrast slope{"slope", Eigen::MatrixXd(1, 3), false, {}};
  slope.weights << 0, 1, -1;
  GroupContrast both{"both", Eigen::MatrixXd(2, 3), true, {}};
  both.weights << 0, 1, 0, 0, 0, 1;
  GroupContrast single{"single", Eigen::MatrixXd(1, 3), true, {}};
  single.weights << 0, 1, -1;
  batch.contrasts = {mean, slope, both, single};
  return batch;
}

bool SameBits(const Eigen::VectorXd& a, const Eigen::VectorXd& b) {
  return a.size() == b.size() &&
         std::memcmp(a.data(), b.data(), sizeof(double) * static_cast<size_t>(a.size())) == 0;
}

bool SameBits(const PooledMaps& a, const PooledMaps& b) {
  bool same = SameBits(a.n, b.n) && SameBits(a.tau2, b.tau2) && SameBits(a.sigma2, b.sigma2) &&
              a.iterations == b.iterations && a.converged == b.converged;
  for (size_t c = 0; c < a.contrasts.size(); ++c) {
    same = same && SameBits(a.contrasts[c].estimate, b.contrasts[c].estimate) &&
           SameBits(a.contrasts[c].variance, b.contrasts[c].variance) &&
           SameBits(a.contrasts[c].stat, b.contrasts[c].stat) &&
           SameBits(a.contrasts[c].z, b.contrasts[c].z) &&
           SameBits(a.contrasts[c].dof, b.contrasts[c].dof);
  }
  return same;
}

TEST(PoolVoxels, ThreadCountNeverChangesABit) {
  const Batch batch = MakeBatch();
  for (PoolMethod method : {PoolMethod::kMixed, PoolMethod::kOls}) {
    const PooledMaps one =
        PoolVoxels(batch.z, batch.y, batch.v, batch.contrasts, method, 1);
    for (int threads : {2, 3, 8}) {
      EXPECT_TRUE(SameBits(one, PoolVoxels(batch.z, batch.y, batch.v, batch.contrasts, method,
                                           threads)))
          << PoolMethodName(method) << " with " << threads << " threads";
    }
  }
}

TEST(PoolVoxels, EachVoxelIsTheSingleFitBitForBit) {
  const Batch batch = MakeBatch();
  const PooledMaps maps =
      PoolVoxels(batch.z, batch.y, batch.v, batch.contrasts, PoolMethod::kMixed, 2);
  int invalid = 0;
  for (Eigen::Index j = 0; j < batch.y.cols(); ++j) {
    const PooledFit fit = FitPooled(batch.z, batch.y.col(j), batch.v.col(j), PoolMethod::kMixed);
    ASSERT_EQ(maps.n[j], fit.n) << j;
    if (!fit.valid) {
      ++invalid;
      EXPECT_TRUE(std::isnan(maps.tau2[j]) && std::isnan(maps.contrasts[0].estimate[j]) &&
                  std::isnan(maps.contrasts[2].z[j]));
      continue;
    }
    ASSERT_EQ(maps.tau2[j], fit.tau2) << j;
    ASSERT_EQ(maps.contrasts[0].estimate[j], fit.beta[0]) << j;
    ASSERT_EQ(maps.contrasts[0].variance[j], fit.covariance(0, 0)) << j;
    ASSERT_EQ(maps.contrasts[0].dof[j], fit.n - 3) << j;
  }
  EXPECT_EQ(invalid, 6);  // voxels 0, 997, ..., 4985
}

TEST(PoolVoxels, TAndFContrastsFollowTheirDefinitions) {
  const Batch batch = MakeBatch();
  const PooledMaps maps =
      PoolVoxels(batch.z, batch.y, batch.v, batch.contrasts, PoolMethod::kMixed, 1);
  for (Eigen::Index j = 1; j < 200; ++j) {
    const PooledFit fit = FitPooled(batch.z, batch.y.col(j), batch.v.col(j), PoolMethod::kMixed);
    ASSERT_TRUE(fit.valid);
    const double dof = fit.n - 3;
    // t = c'b / sqrt(c'Cc) for c = (0, 1, -1).
    const Eigen::RowVector3d c(0, 1, -1);
    const double t = c.dot(fit.beta) / std::sqrt(c * fit.covariance * c.transpose());
    EXPECT_NEAR(maps.contrasts[1].stat[j], t, 1e-12 * (1 + std::abs(t)));
    EXPECT_EQ(maps.contrasts[1].z[j], ZFromT(maps.contrasts[1].stat[j], dof));
    // A one-row F is t^2, and P(F(1, dof) > t^2) = 2 P(T > |t|) (the t-F identity).
    const double f = maps.contrasts[3].stat[j];
    EXPECT_NEAR(f, t * t, 1e-12 * (1 + t * t));
    const double z_of_f = ZFromLogUpperTail(std::log(2.0) + LogUpperTailT(std::abs(t), dof));
    EXPECT_NEAR(maps.contrasts[3].z[j], z_of_f, 1e-9 * (1 + std::abs(z_of_f)));
    // Two-row F: (Cb)'(C Cov C')^-1 (Cb) / 2.
    Eigen::MatrixXd cc(2, 3);
    cc << 0, 1, 0, 0, 0, 1;
    const Eigen::VectorXd cb = cc * fit.beta;
    const double f2 = cb.dot((cc * fit.covariance * cc.transpose()).inverse() * cb) / 2;
    EXPECT_NEAR(maps.contrasts[2].stat[j], f2, 1e-12 * (1 + f2));
    EXPECT_TRUE(std::isnan(maps.contrasts[2].estimate[j]));
  }
}

TEST(PoolVoxels, ShapeMismatchThrows) {
  const Batch batch = MakeBatch();
  EXPECT_THROW(PoolVoxels(batch.z, batch.y, batch.v.leftCols(10), {}, PoolMethod::kMixed, 1),
               Error);
  GroupContrast wrong{"wrong", Eigen::MatrixXd::Ones(1, 2), false, {}};
  EXPECT_THROW(PoolVoxels(batch.z, batch.y, batch.v, {wrong}, PoolMethod::kMixed, 1), Error);
}

}  // namespace
}  // namespace boldsum
