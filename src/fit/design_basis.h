// Everything about one run's design that the per-voxel fit needs, computed once:
// the kept columns of a rank-revealing QR, the Gram matrices behind X'V^-1 X, the
// bias-correction system of the AR(1) estimate and the representation of the constant.
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

// X'V^-1 X on the kept columns at lag-1 correlation rho, written into *a (r x r,
// preallocated): (1 + rho^2) xtx - rho lag - rho^2 ends (Prais-Winsten, V^-1 = W'W).
inline void WhitenedGram(const KeptGram& g, double rho, Eigen::MatrixXd* a) {
  const double c0 = 1.0 + rho * rho;
  const double c2 = rho * rho;
  a->noalias() = c0 * g.xtx - rho * g.lag - c2 * g.ends;
}

struct DesignBasis {
  int n = 0;                      // volumes
  int p = 0;                      // columns of X
  int rank = 0;                   // r = kept.size()
  std::vector<int> kept;          // ascending
  DesignGram gram;                // all p columns
  KeptGram kept_gram;             // r x r
  Eigen::VectorXd first_k;        // row 0 of X on the kept columns
  Eigen::VectorXd last_k;         // row N-1 of X on the kept columns
  Eigen::MatrixXd z;              // N x 2r: [X_k, D X_k], D = L + L'
  Eigen::LLT<Eigen::MatrixXd> ols;  // Cholesky of X_k'X_k
  // m(j, k) = tr(R Dj R Dk), D0 = I, D1 = D, R = I - X X^+ (Worsley et al. 2002,
  // NeuroImage 15:1-15): E[e'Dj e] = sum_k m(j, k) gamma_k for Cov(y) = gamma_0 I +
  // gamma_1 D.
  Eigen::Matrix2d m;
  // True when the constant series lies in the span of X (X_k a = 1 within 1e-9 sqrt(N)
  // in norm); then each voxel's first value is subtracted before the sums are formed and
  // added back as offset * a.
  bool has_constant = false;
  Eigen::VectorXd constant_k;     // a, length r (zero when !has_constant)
};

// Throws Error when x has a non-finite entry, no rows, rank 0, or N <= rank.
DesignBasis AnalyseDesign(const Eigen::MatrixXd& x);

}  // namespace fit
}  // namespace boldsum
