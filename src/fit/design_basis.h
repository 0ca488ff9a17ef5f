// Everything about one run's design that the per-voxel fit needs, computed once:
// the kept columns of a rank-revealing QR, the Gram matrices behind X'V^-1 X, a basis in
// which they are diagonal, the bias-correction system of the AR(1) estimate and the
// representation of the constant.
#pragma once

#include <Eigen/Dense>
#include <vector>

#include "boldsum/fit.h"

namespace boldsum {
namespace fit {

// Column j of X is kept when, in the column-pivoted Householder QR of X with every column
// scaled to unit Euclidean norm, its |R_jj| exceeds this (the largest pivot is then 1).
// The fit solves normal equations, whose relative error grows like eps * cond(X_kept)^2,
// so columns closer than this to the span of the others are treated as dependent.
constexpr double kRankTolerance = 1e-7;

// The p x p Gram matrices restricted to the kept columns (r x r), in kept order.
struct KeptGram {
  Eigen::MatrixXd xtx, lag, ends;
};

KeptGram SelectKept(const DesignGram& gram, const std::vector<int>& kept);

// X_k'V^-1 X_k = (1 + rho^2) xtx - rho lag - rho^2 ends (Prais-Winsten, V^-1 = W'W) in a
// basis that makes it diagonal up to a rank-2 term. With V (r x r) from the symmetric-
// definite generalized eigenproblem lag v = lambda xtx v (Golub & Van Loan, Matrix
// Computations, 4th ed., sec. 8.7), V' xtx V = I and V' lag V = diag(lambda), lambda in
// [-2, 2] (Rayleigh quotients of L + L'); V' ends V = F F' (F: r x 2, from its two largest
// eigenpairs; ends has rank <= 2). So
//   V' X_k'V^-1 X_k V = M(rho) = diag(d) - rho^2 F F',  d_i = 1 + rho^2 - rho lambda_i,
// and M^-1 = D^-1 + D^-1 G K^-1 G' D^-1 with G = rho F, K = I_2 - G' D^-1 G (Woodbury
// 1950, "Inverting modified matrices", Memorandum Report 42, Statistical Research Group,
// Princeton). So beta = V M^-1 V' b: an exact solve in O(r) per voxel once V is known.
struct DiagonalGram {
  Eigen::MatrixXd v;       // r x r
  Eigen::VectorXd lambda;  // r
  Eigen::MatrixXd f;       // r x 2
};

// Throws Error when xtx is not positive definite (numerical breakdown).
DiagonalGram DiagonaliseGram(const KeptGram& g);

// M(rho) of DiagonalGram, factored for solves: 1/d and the Cholesky factor of K.
class WhitenedSolver {
 public:
  explicit WhitenedSolver(Eigen::Index r) : inv_d_(r), dg_(r, 2) {}
  // Returns false when |rho| >= 1 or M(rho) is not numerically positive definite.
  bool Factor(const DiagonalGram& g, double rho);
  // x := M^-1 x; returns x' M^-1 x for the x given (before the solve).
  double SolveInPlace(Eigen::Ref<Eigen::VectorXd> x) const;
  // c' M^-1 c for the columns of c (r x q), written into out (q x q, preallocated).
  void InverseForm(const Eigen::MatrixXd& c, Eigen::MatrixXd* out) const;

 private:
  Eigen::VectorXd inv_d_;               // 1 / d
  Eigen::MatrixXd dg_;                  // D^-1 G, r x 2
  double k00_ = 1, k10_ = 0, k11_ = 1;  // lower Cholesky factor of K
  bool rank2_ = false;                  // rho != 0
  mutable Eigen::VectorXd t_;           // scratch of InverseForm: T column by column
};

struct DesignBasis {
  int n = 0;                // volumes
  int p = 0;                // columns of X
  int rank = 0;             // r = kept.size()
  std::vector<int> kept;    // ascending
  DesignGram gram;          // all p columns
  KeptGram kept_gram;       // r x r
  DiagonalGram diagonal;    // V, lambda, F of kept_gram
  Eigen::VectorXd first_t;  // V' x_0 (row 0 of X on the kept columns)
  Eigen::VectorXd last_t;   // V' x_{N-1}
  Eigen::MatrixXd z;        // N x 2r: [X_k V, D X_k V], D = L + L'
  // m(j, k) = tr(R Dj R Dk), D0 = I, D1 = D, R = I - X X^+ (Worsley et al. 2002,
  // NeuroImage 15:1-15): E[e'Dj e] = sum_k m(j, k) gamma_k for Cov(y) = gamma_0 I +
  // gamma_1 D.
  Eigen::Matrix2d m;
  // True when the constant series lies in the span of X (X_k a = 1 within 1e-9 sqrt(N)
  // in norm); then each voxel's first value is subtracted before the sums are formed and
  // added back as offset * a.
  bool has_constant = false;
  Eigen::VectorXd constant_k;  // a, length r (zero when !has_constant)
};

// Throws Error when x has a non-finite entry, no rows, rank 0, or N <= rank.
DesignBasis AnalyseDesign(const Eigen::MatrixXd& x);

}  // namespace fit
}  // namespace boldsum
