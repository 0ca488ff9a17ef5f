// The per-voxel solve of the AR(1) normal equations in the diagonalising basis
// (design_basis.h: generalized eigenvectors plus a rank-2 Woodbury term) against the
// dense textbook computation from an explicit Prais-Winsten whitening matrix.
#include <gtest/gtest.h>

#include <cmath>
#include <limits>
#include <random>

#include "fit/design_basis.h"
#include "fit_test_util.h"

namespace boldsum {
namespace {

constexpr double kEps = std::numeric_limits<double>::epsilon();

// X'V^-1 X = (W X)'(W X) with W the N x N Prais-Winsten matrix (Prais & Winsten 1954),
// formed from the whitened columns themselves: no Gram identity involved.
Eigen::MatrixXd DenseWhitenedGram(const Eigen::MatrixXd& x, double rho) {
  const Eigen::MatrixXd wx = fit_test::PraisWinsten(x, rho);
  return wx.transpose() * wx;
}

// For rho across (-1, 1), including +-0.99 where the slowest design directions (the
// intercept and the lowest cosine, lambda near 2) are nearly singular in X'V^-1 X:
// beta = V M^-1 V' b, b'A^-1 b and c'A^-1 c match a Cholesky solve of the dense A.
// Tolerance k cond(A) eps (Golub & Van Loan, Matrix Computations, sec. 2.6.2) with
// k = 1000: any form built from the Gram matrices X'X, X'DX, x_0 x_0' + x_N x_N' starts
// from A's entries as sums that cancel as rho -> 1, by up to ~1/(1 - rho)^2 (observed
// error / (cond(A) eps) up to 390 here, and up to 364 for a Cholesky of the Gram-matrix
// form of A, the fit's method before this basis; the dense solve of W X: below 1).
TEST(WhitenedSolver, MatchesDenseSolveAcrossRho) {
  for (int n : {40, 200, 1200}) {
    const Eigen::MatrixXd x = fit_test::BlockDesign(n, n > 500 ? 0.8 : 2.0);
    const fit::DesignBasis basis = fit::AnalyseDesign(x);
    ASSERT_EQ(basis.rank, x.cols());
    std::mt19937_64 rng(n);
    std::normal_distribution<double> normal;
    Eigen::VectorXd b(x.cols());
    for (Eigen::Index i = 0; i < b.size(); ++i) b(i) = 100 * normal(rng);
    Eigen::MatrixXd c = Eigen::MatrixXd::Zero(x.cols(), 2);
    c(0, 0) = 1;
    c(1, 0) = -1;
    c(x.cols() - 1, 1) = 1;  // the intercept
    fit::WhitenedSolver solver(basis.rank);
    for (double rho : {-0.99, -0.6, -1e-8, 0.0, 1e-8, 0.3, 0.9, 0.99}) {
      const Eigen::MatrixXd a = DenseWhitenedGram(x, rho);
      const Eigen::LLT<Eigen::MatrixXd> llt(a);
      ASSERT_EQ(llt.info(), Eigen::Success);
      const Eigen::JacobiSVD<Eigen::MatrixXd> svd(a);
      const double cond = svd.singularValues()(0) / svd.singularValues()(x.cols() - 1);
      const double tol = 1000 * cond * kEps;
      ASSERT_TRUE(solver.Factor(basis.diagonal, rho)) << "rho " << rho;
      Eigen::VectorXd bt = basis.diagonal.v.transpose() * b;
      const double quad = solver.SolveInPlace(bt);
      const Eigen::VectorXd beta = basis.diagonal.v * bt;
      const Eigen::VectorXd want = llt.solve(b);
      EXPECT_LE((beta - want).norm() / want.norm(), tol) << "n " << n << ", rho " << rho;
      EXPECT_NEAR(quad / b.dot(want), 1.0, tol) << "n " << n << ", rho " << rho;
      Eigen::MatrixXd form(2, 2);
      solver.InverseForm(basis.diagonal.v.transpose() * c, &form);
      const Eigen::MatrixXd form_want = c.transpose() * llt.solve(c);
      EXPECT_LE(fit_test::MaxRelError(form, form_want), tol) << "n " << n << ", rho " << rho;
    }
    EXPECT_FALSE(solver.Factor(basis.diagonal, 1.0));
    EXPECT_FALSE(solver.Factor(basis.diagonal, -1.5));
    EXPECT_FALSE(solver.Factor(basis.diagonal, std::nan("")));
  }
}

// The basis itself: V'X'X V = I and V'X'DX V = diag(lambda) with lambda in [-2, 2], and
// V'(x_0 x_0' + x_{N-1} x_{N-1}')V = F F' (rank 2), to rounding relative to cond(X)^2.
TEST(WhitenedSolver, BasisDiagonalisesTheGramMatrices) {
  const Eigen::MatrixXd x = fit_test::BlockDesign(300, 2.0, 4);
  const fit::DesignBasis basis = fit::AnalyseDesign(x);
  const fit::DiagonalGram& g = basis.diagonal;
  const Eigen::Index r = basis.rank;
  const Eigen::JacobiSVD<Eigen::MatrixXd> svd(x);
  const double cond = svd.singularValues()(0) / svd.singularValues()(r - 1);
  const double tol = 10 * cond * cond * kEps;
  const Eigen::MatrixXd identity = g.v.transpose() * basis.kept_gram.xtx * g.v;
  EXPECT_LE((identity - Eigen::MatrixXd::Identity(r, r)).cwiseAbs().maxCoeff(), tol);
  Eigen::MatrixXd lag = Eigen::MatrixXd::Zero(300, 300);
  for (int k = 1; k < 300; ++k) lag(k, k - 1) = lag(k - 1, k) = 1;
  const Eigen::MatrixXd diagonal = g.v.transpose() * x.transpose() * lag * x * g.v;
  EXPECT_LE((diagonal - Eigen::MatrixXd(g.lambda.asDiagonal())).cwiseAbs().maxCoeff(), tol);
  EXPECT_LE(g.lambda.cwiseAbs().maxCoeff(), 2.0);
  const Eigen::MatrixXd ends =
      x.row(0).transpose() * x.row(0) + x.row(299).transpose() * x.row(299);
  const Eigen::MatrixXd ends_t = g.v.transpose() * ends * g.v;
  EXPECT_LE(fit_test::MaxRelError(g.f * g.f.transpose(), ends_t), tol);
}

// A duplicated column is dropped, and the constant is still found in the span of the
// kept columns (so that the offset is subtracted before the sums are formed).
TEST(WhitenedSolver, ConstantFoundWhenAColumnIsDuplicated) {
  const Eigen::MatrixXd base = fit_test::BlockDesign(160, 2.0);
  Eigen::MatrixXd x(160, base.cols() + 1);
  x << base.col(0), base;
  const fit::DesignBasis basis = fit::AnalyseDesign(x);
  EXPECT_EQ(basis.rank, base.cols());
  ASSERT_TRUE(basis.has_constant);
  Eigen::MatrixXd xk(160, basis.rank);
  for (int i = 0; i < basis.rank; ++i) xk.col(i) = x.col(basis.kept[i]);
  EXPECT_LE((xk * basis.constant_k - Eigen::VectorXd::Ones(160)).cwiseAbs().maxCoeff(), 100 * kEps);
}

}  // namespace
}  // namespace boldsum
