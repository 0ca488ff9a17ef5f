// Properties of FitRun / EstimateContrast / TestContrast (RapidCheck).
#include <gtest/gtest.h>
#include <rapidcheck/gtest.h>

#include <cmath>
#include <cstring>
#include <numeric>
#include <random>

#include "boldsum/fit.h"
#include "fit_test_util.h"

namespace boldsum {
namespace {

// A design whose entries are multiples of 1/8 in [-2, 2] plus an intercept, and data on
// a 2^-8 grid in (-64, 64): a y + X g for the a and g drawn below stays exactly
// representable in float32, so the property compares fits of exactly the intended data.
struct DyadicCase {
  Eigen::MatrixXd x, y;
};

DyadicCase GenDyadicCase() {
  const int n = *rc::gen::inRange(30, 91);
  const int p = *rc::gen::inRange(2, 7);
  const int v = *rc::gen::inRange(1, 6);
  std::mt19937_64 rng(*rc::gen::inRange(0, 1 << 30));
  std::uniform_int_distribution<int> eighths(-16, 16);
  DyadicCase c;
  c.x.resize(n, p);
  for (int j = 0; j + 1 < p; ++j) {
    for (int k = 0; k < n; ++k) c.x(k, j) = eighths(rng) / 8.0;
  }
  c.x.col(p - 1).setOnes();
  std::uniform_real_distribution<double> rho(0.0, 0.8);
  Eigen::VectorXd rhos(v);
  for (int i = 0; i < v; ++i) rhos(i) = rho(rng);
  c.y = (fit_test::Ar1Noise(n, rhos, &rng) * 2.0 * 256.0).array().round() / 256.0;
  c.y = c.y.cwiseMax(-63.0).cwiseMin(63.0);
  c.y.array() += 10.0 * eighths(rng) / 8.0;
  return c;
}

// A realistic block design with AR(1) noise, for the determinism properties.
struct RealisticCase {
  Eigen::MatrixXd x, y;
};

RealisticCase GenRealisticCase(int min_voxels, int max_voxels) {
  const int n = *rc::gen::inRange(40, 81);
  const int v = *rc::gen::inRange(min_voxels, max_voxels + 1);
  std::mt19937_64 rng(*rc::gen::inRange(0, 1 << 30));
  RealisticCase c;
  c.x = fit_test::BlockDesign(n, 2.0);
  std::uniform_real_distribution<double> rho(0.0, 0.7);
  Eigen::VectorXd rhos(v);
  for (int i = 0; i < v; ++i) rhos(i) = rho(rng);
  c.y = fit_test::Ar1Noise(n, rhos, &rng);
  c.y.array() += 1000.0;
  c.y = fit_test::AsFloat(c.y + c.x.col(0) * Eigen::VectorXd::LinSpaced(v, -2, 2).transpose());
  return c;
}

struct Outputs {
  RunFit fit;
  ContrastEstimate est;
  ContrastTest test;
};

Outputs FitAll(const Eigen::MatrixXd& x, const Eigen::MatrixXd& y, const Eigen::MatrixXd& c,
               NoiseModel noise, int threads, int block) {
  FitOptions options;
  options.noise = noise;
  options.threads = threads;
  MatrixSource source(y, block);
  Outputs o{FitRun(x, &source, options), {}, {}};
  o.est = EstimateContrast(o.fit, c, options);
  o.test = TestContrast(o.est, c.rows() > 1, threads);
  return o;
}

bool SameBits(const Eigen::MatrixXd& a, const Eigen::MatrixXd& b) {
  return a.rows() == b.rows() && a.cols() == b.cols() &&
         std::memcmp(a.data(), b.data(), sizeof(double) * static_cast<size_t>(a.size())) == 0;
}

double RelDiff(const Eigen::MatrixXd& a, const Eigen::MatrixXd& b) {
  return (a - b).cwiseAbs().maxCoeff() / std::max(b.cwiseAbs().maxCoeff(), 1e-300);
}

Eigen::MatrixXd FirstRowContrast(int p) {
  Eigen::MatrixXd c = Eigen::MatrixXd::Zero(1, p);
  c(0, 0) = 1.0;
  return c;
}

// noise: none is OLS: rho = 0, beta and sigma2 as from a Householder QR least-squares
// solve (the textbook OLS), Var(c'b) = sigma2 c'(X'X)^-1 c. Tolerance 1e-10: the fit
// uses normal equations, whose error is ~ cond(X)^2 eps, cond(X) < ~100 here (observed
// ~2e-15).
RC_GTEST_PROP(FitProperty, NoNoiseModelIsOrdinaryLeastSquares, ()) {
  const DyadicCase d = GenDyadicCase();
  const Eigen::MatrixXd c = FirstRowContrast(static_cast<int>(d.x.cols()));
  const Outputs o = FitAll(d.x, d.y, c, NoiseModel::kNone, 1, 64);
  Eigen::ColPivHouseholderQR<Eigen::MatrixXd> qr(d.x);
  RC_ASSERT(qr.rank() == d.x.cols());  // random columns of >= 30 rows: full rank
  const Eigen::MatrixXd beta = qr.solve(d.y);
  const double dof = static_cast<double>(d.x.rows() - d.x.cols());
  const Eigen::VectorXd sigma2 = (d.y - d.x * beta).colwise().squaredNorm().transpose() / dof;
  const double cxxc = (c * (d.x.transpose() * d.x).inverse() * c.transpose())(0, 0);
  RC_ASSERT(o.fit.rho.isZero(0.0));
  RC_ASSERT(RelDiff(o.fit.beta, beta) <= 1e-10);
  RC_ASSERT(RelDiff(o.fit.sigma2, sigma2) <= 1e-10);
  RC_ASSERT(RelDiff(o.est.covariance, sigma2.transpose() * cxxc) <= 1e-10);
}

// y -> a y + X g: beta -> a beta + g, contrast variances -> a^2 var, rho unchanged
// (the GLS estimator is linear and reproduces X g exactly; e = R y scales by a).
RC_GTEST_PROP(FitProperty, AffineDataChangeMovesEstimatesAccordingly, ()) {
  const DyadicCase d = GenDyadicCase();
  const double a = *rc::gen::element(-3.0, -2.0, -0.5, -0.25, 0.25, 0.5, 1.0, 2.0, 3.0);
  Eigen::VectorXd g(d.x.cols());
  for (Eigen::Index j = 0; j < g.size(); ++j) g(j) = *rc::gen::inRange(-64, 65) / 8.0;
  const Eigen::MatrixXd y2 = a * d.y + (d.x * g).replicate(1, d.y.cols());
  RC_ASSERT(fit_test::AsFloat(y2) == y2);
  const Eigen::MatrixXd c = FirstRowContrast(static_cast<int>(d.x.cols()));
  const Outputs o1 = FitAll(d.x, d.y, c, NoiseModel::kAr1, 1, 64);
  const Outputs o2 = FitAll(d.x, y2, c, NoiseModel::kAr1, 1, 64);
  RC_ASSERT(o1.fit.rank == d.x.cols());
  const Eigen::MatrixXd want = a * o1.fit.beta + g.replicate(1, d.y.cols());
  // Relative to the size of the estimates; rounding differs between the two fits
  // (observed ~6e-13; 1e-10 leaves room for the cond(X)^2 eps of the normal equations).
  RC_ASSERT(RelDiff(o2.fit.beta, want) <= 1e-10);
  RC_ASSERT((o2.fit.rho - o1.fit.rho).cwiseAbs().maxCoeff() <= 1e-10);
  RC_ASSERT(RelDiff(o2.fit.sigma2, a * a * o1.fit.sigma2) <= 1e-10);
  RC_ASSERT(RelDiff(o2.est.covariance, a * a * o1.est.covariance) <= 1e-10);
}

// Permuting voxels permutes every output. A voxel's position inside a GEMM panel may
// change its rounding (observed: a few voxels in a hundred runs, by ~1e-17 relative),
// so the tolerance is 1e-12 relative rather than bitwise.
RC_GTEST_PROP(FitProperty, PermutingVoxelsPermutesOutputs, ()) {
  const RealisticCase d = GenRealisticCase(1, 300);
  std::vector<int> perm(static_cast<size_t>(d.y.cols()));
  std::iota(perm.begin(), perm.end(), 0);
  std::mt19937_64 rng(*rc::gen::inRange(0, 1 << 30));
  std::shuffle(perm.begin(), perm.end(), rng);
  Eigen::MatrixXd y2(d.y.rows(), d.y.cols());
  for (size_t i = 0; i < perm.size(); ++i) y2.col(static_cast<Eigen::Index>(i)) = d.y.col(perm[i]);
  const Eigen::MatrixXd c = FirstRowContrast(static_cast<int>(d.x.cols()));
  const Outputs o1 = FitAll(d.x, d.y, c, NoiseModel::kAr1, 1, 64);
  const Outputs o2 = FitAll(d.x, y2, c, NoiseModel::kAr1, 1, 64);
  for (size_t i = 0; i < perm.size(); ++i) {
    const Eigen::Index a = static_cast<Eigen::Index>(i), b = perm[i];
    RC_ASSERT(o2.fit.valid[i] == o1.fit.valid[static_cast<size_t>(b)]);
    RC_ASSERT(RelDiff(o2.fit.beta.col(a), o1.fit.beta.col(b)) <= 1e-12);
    RC_ASSERT(std::abs(o2.fit.rho(a) - o1.fit.rho(b)) <= 1e-12);
    RC_ASSERT(std::abs(o2.fit.sigma2(a) / o1.fit.sigma2(b) - 1) <= 1e-12);
    RC_ASSERT(std::abs(o2.test.stat(a) - o1.test.stat(b)) <=
              1e-12 * (1 + std::abs(o1.test.stat(b))));
  }
}

// Every voxel's arithmetic is the same for any thread count: bitwise identical outputs.
RC_GTEST_PROP(FitProperty, ThreadCountNeverChangesABit, ()) {
  const RealisticCase d = GenRealisticCase(257, 560);  // two or three voxel chunks
  Eigen::MatrixXd c = Eigen::MatrixXd::Zero(2, d.x.cols());
  c(0, 0) = c(1, 1) = 1.0;
  const Outputs o1 = FitAll(d.x, d.y, c, NoiseModel::kAr1, 1, 64);
  for (int threads : {2, 3, 8}) {
    const Outputs o = FitAll(d.x, d.y, c, NoiseModel::kAr1, threads, 64);
    RC_ASSERT(SameBits(o.fit.beta, o1.fit.beta));
    RC_ASSERT(SameBits(o.fit.rho, o1.fit.rho));
    RC_ASSERT(SameBits(o.fit.sigma2, o1.fit.sigma2));
    RC_ASSERT(SameBits(o.est.effect, o1.est.effect));
    RC_ASSERT(SameBits(o.est.covariance, o1.est.covariance));
    RC_ASSERT(SameBits(o.test.stat, o1.test.stat));
    RC_ASSERT(SameBits(o.test.z, o1.test.z));
  }
}

// Estimating several contrasts at once gives each the bits it gets alone.
RC_GTEST_PROP(FitProperty, ContrastsTogetherEqualContrastsAlone, ()) {
  const RealisticCase d = GenRealisticCase(1, 40);
  const Eigen::Index p = d.x.cols();
  Eigen::MatrixXd t = Eigen::MatrixXd::Zero(1, p), f = Eigen::MatrixXd::Zero(2, p);
  t(0, 0) = 1.0;
  t(0, 1) = -1.0;
  f(0, 0) = f(1, 1) = 1.0;
  Eigen::MatrixXd drift = Eigen::MatrixXd::Zero(1, p);
  drift(0, p - 2) = 1.0;
  FitOptions options;
  options.threads = *rc::gen::inRange(1, 4);
  MatrixSource source(d.y, 64);
  const RunFit fit = FitRun(d.x, &source, options);
  const std::vector<ContrastEstimate> together = EstimateContrasts(fit, {t, f, drift}, options);
  RC_ASSERT(together.size() == 3u);
  const Eigen::MatrixXd* cs[] = {&t, &f, &drift};
  for (size_t k = 0; k < 3; ++k) {
    const ContrastEstimate alone = EstimateContrast(fit, *cs[k], options);
    RC_ASSERT(SameBits(together[k].effect, alone.effect));
    RC_ASSERT(SameBits(together[k].covariance, alone.covariance));
    RC_ASSERT(together[k].valid == alone.valid);
    RC_ASSERT(together[k].estimable == alone.estimable);
  }
}

// The block size only reorders sums over time: results agree to 1e-12 relative (a few
// ulps of the sums, amplified by the cancellation in e'e = y'y - b'X'y and the 2 x 2
// bias-correction solve; observed <= 1e-14).
RC_GTEST_PROP(FitProperty, BlockSizeChangesResultsOnlyByRounding, ()) {
  const RealisticCase d = GenRealisticCase(1, 40);
  const int block = *rc::gen::element(1, 2, 7, 33, 1000);
  const Eigen::MatrixXd c = FirstRowContrast(static_cast<int>(d.x.cols()));
  const Outputs o1 = FitAll(d.x, d.y, c, NoiseModel::kAr1, 1, 64);
  const Outputs o2 = FitAll(d.x, d.y, c, NoiseModel::kAr1, 1, block);
  RC_ASSERT(RelDiff(o2.fit.beta, o1.fit.beta) <= 1e-12);
  RC_ASSERT((o2.fit.rho - o1.fit.rho).cwiseAbs().maxCoeff() <= 1e-12);
  RC_ASSERT(RelDiff(o2.fit.sigma2, o1.fit.sigma2) <= 1e-12);
  RC_ASSERT(RelDiff(o2.est.covariance, o1.est.covariance) <= 1e-12);
  RC_ASSERT(RelDiff(o2.test.stat, o1.test.stat) <= 1e-12);
}

}  // namespace
}  // namespace boldsum
