// The sums accumulated from float blocks (images): the run-time-selected SIMD kernel and
// the portable Eigen path against a plain long double loop over the same float values.
#include "fit/sufficient_stats.h"

#include <gtest/gtest.h>

#include <cmath>
#include <random>
#include <vector>

#include "boldsum/fit.h"
#include "fit/design_basis.h"
#include "fit_test_util.h"

namespace boldsum {
namespace {

// Float blocks of `block` volumes, as VolumeStream hands them out.
class FloatSource : public BlockSource {
 public:
  FloatSource(const Eigen::MatrixXf& data, int block) : data_(data), block_(block) {}
  int n_volumes() const override { return static_cast<int>(data_.rows()); }
  int n_voxels() const override { return static_cast<int>(data_.cols()); }
  bool Next(Eigen::MatrixXf* out) override {
    const int rows = std::min<int>(block_, n_volumes() - next_);
    if (rows <= 0) return false;
    *out = data_.middleRows(next_, rows);
    next_ += rows;
    return true;
  }

 private:
  const Eigen::MatrixXf& data_;
  int block_;
  int next_ = 0;
};

// Sums of products of doubles formed from floats: each product is exact in long double
// (24 + 53 bits < 64 + 1 would not hold for doubles of Z, so the bound is relative to the
// sum of |terms|): |error| <= k * N * eps * sum |z_ti y_t| with k = 4.
TEST(SufficientStats, KernelsMatchAPlainSum) {
  for (int n : {7, 33, 300}) {
    const Eigen::MatrixXd x = fit_test::BlockDesign(n, 2.0, 3);
    const fit::DesignBasis basis = fit::AnalyseDesign(x);
    std::mt19937_64 rng(n);
    const int v = 4 * 37 + 3;  // whole and partial groups of four voxels
    Eigen::MatrixXd y = fit_test::Ar1Noise(n, Eigen::VectorXd::Constant(v, 0.4), &rng);
    y.array() += 1000.0;
    y += x.col(0) * Eigen::VectorXd::LinSpaced(v, -5, 5).transpose();
    const Eigen::MatrixXf yf = y.cast<float>();
    for (int block : {1, 5, 32}) {
      FloatSource auto_source(yf, block), portable_source(yf, block);
      const fit::SufficientStats fast = fit::AccumulateStats(basis, &auto_source, 2);
      const fit::SufficientStats slow =
          fit::AccumulateStats(basis, &portable_source, 1, fit::StatsKernel::kPortable);
      for (int j = 0; j < v; ++j) {
        const long double offset = basis.has_constant ? yf(0, j) : 0.0f;
        ASSERT_EQ(fast.offset(j), static_cast<double>(offset));
        ASSERT_EQ(slow.offset(j), static_cast<double>(offset));
        long double yy = 0, ydy = 0, yy_abs = 0;
        for (int t = 0; t < n; ++t) {
          const long double yt = yf(t, j) - offset;
          yy += yt * yt;
          yy_abs += yt * yt;
          if (t > 0) ydy += 2 * yt * (yf(t - 1, j) - offset);
        }
        const double tol = 4 * n * std::numeric_limits<double>::epsilon();
        for (const fit::SufficientStats* s : {&fast, &slow}) {
          EXPECT_NEAR(s->yy(j), static_cast<double>(yy), tol * static_cast<double>(yy_abs));
          EXPECT_NEAR(s->ydy(j), static_cast<double>(ydy), 2 * tol * static_cast<double>(yy_abs));
          EXPECT_EQ(s->first(j), static_cast<double>(yf(0, j) - offset));
          EXPECT_EQ(s->last(j), static_cast<double>(yf(n - 1, j) - offset));
          for (Eigen::Index i = 0; i < basis.z.cols(); ++i) {
            long double sum = 0, abs_sum = 0;
            for (int t = 0; t < n; ++t) {
              const long double term = basis.z(t, i) * (yf(t, j) - offset);
              sum += term;
              abs_sum += std::fabs(term);
            }
            EXPECT_NEAR(s->g(i, j), static_cast<double>(sum), tol * static_cast<double>(abs_sum))
                << "n " << n << ", block " << block << ", voxel " << j << ", row " << i;
          }
        }
      }
    }
  }
}

// The same voxel gives the same bits wherever it sits in a group of four and for any
// thread count (FitRun's determinism rests on this).
TEST(SufficientStats, AVoxelsSumsDoNotDependOnItsNeighbours) {
  const int n = 64;
  const Eigen::MatrixXd x = fit_test::BlockDesign(n, 2.0);
  const fit::DesignBasis basis = fit::AnalyseDesign(x);
  std::mt19937_64 rng(3);
  const Eigen::MatrixXd y = fit_test::Ar1Noise(n, Eigen::VectorXd::Constant(9, 0.3), &rng);
  const Eigen::MatrixXf yf = (y.array() + 500.0).matrix().cast<float>();
  FloatSource all_source(yf, 16);
  const fit::SufficientStats all = fit::AccumulateStats(basis, &all_source, 3);
  for (int j = 0; j < 9; ++j) {
    const Eigen::MatrixXf one = yf.col(j);
    FloatSource one_source(one, 16);
    const fit::SufficientStats alone = fit::AccumulateStats(basis, &one_source, 1);
    for (Eigen::Index i = 0; i < basis.z.cols(); ++i) EXPECT_EQ(alone.g(i, 0), all.g(i, j));
    EXPECT_EQ(alone.yy(0), all.yy(j));
    EXPECT_EQ(alone.ydy(0), all.ydy(j));
  }
}

}  // namespace
}  // namespace boldsum
