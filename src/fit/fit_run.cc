// FitRun: OLS, bias-corrected AR(1) and exact Prais-Winsten GLS per voxel, all from the
// sufficient statistics of fit/sufficient_stats.h (one pass over the data).
//
// Per voxel, with X_k the kept columns (r of them), D = L + L', y after the offset, and
// the basis V of design_basis.h (V'X_k'X_k V = I, V'X_k'DX_k V = diag(lambda)), the sums
// arrive as g1 = V'X_k'y and g2 = V'X_k'Dy:
// 1. OLS: b = (X_k'X_k)^-1 X_k'y = V g1; e'e = y'y - b'X_k'y = y'y - |g1|^2;
//    e'De = y'Dy - 2 b'X_k'Dy + b'X_k'DX_k b = y'Dy - 2 g1'g2 + sum lambda_i g1_i^2.
// 2. AR(1), Worsley et al. (2002, NeuroImage 15:1-15): m (g0, g1)' = (e'e, e'De)' with
//    m_jk = tr(R Dj R Dk), D0 = I, D1 = D (design_basis.h); rho = g1 / g0 in [-0.99, 0.99].
// 3. GLS at rho (Prais & Winsten 1954, via <Wa, Wb> = (1 + rho^2) a'b - rho a'Db -
//    rho^2 (a_0 b_0 + a_{N-1} b_{N-1})): with c = V'X_k'V^-1 y and M(rho) = V'X_k'V^-1 X_k V
//    (diagonal plus rank 2, solved exactly by WhitenedSolver), beta = V M^-1 c and the
//    whitened RSS = y'V^-1 y - c'M^-1 c.
// 4. sigma2 = RSS / (N - r), the innovation variance; noise: none uses rho = 0, RSS = e'e.
// beta of the columns not kept is 0; the offset is added back as offset * a (X_k a = 1).
#include <algorithm>
#include <cmath>
#include <limits>
#include <string>

#include "boldsum/error.h"
#include "boldsum/fit.h"
#include "common/huge_pages.h"
#include "fit/design_basis.h"
#include "fit/parallel.h"
#include "fit/sufficient_stats.h"

namespace boldsum {

namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
constexpr double kRhoLimit = 0.99;

// A voxel has zero residual variance when its OLS residual sum of squares is at most
// this times N times y'y (y after the offset): the rounding error of e'e = y'y - b'X'y
// is of order N eps y'y, so anything below is indistinguishable from an exact fit.
constexpr double kZeroResidual = 1e3 * std::numeric_limits<double>::epsilon();

// rho = gamma_1 / gamma_0 from the bias-corrected system m gamma = (e'e, e'De), clamped
// to [-0.99, 0.99]. When gamma_0 <= 0 (lag-1 sum beyond what any covariance of that form
// explains) rho is the limit with the sign of gamma_1.
double BiasCorrectedRho(const Eigen::Matrix2d& m_inverse, double s0, double s1) {
  const double g0 = m_inverse(0, 0) * s0 + m_inverse(0, 1) * s1;
  const double g1 = m_inverse(1, 0) * s0 + m_inverse(1, 1) * s1;
  if (!(g0 > 0)) return g1 > 0 ? kRhoLimit : (g1 < 0 ? -kRhoLimit : 0.0);
  return std::clamp(g1 / g0, -kRhoLimit, kRhoLimit);
}

}  // namespace

RunFit FitRun(const Eigen::MatrixXd& x, BlockSource* data, const FitOptions& options) {
  if (options.threads < 1) {
    throw Error("FitOptions::threads = " + std::to_string(options.threads) +
                "; it must be at least 1");
  }
  if (data == nullptr) throw Error("FitRun: no data source");
  if (x.rows() != data->n_volumes()) {
    throw Error("design matrix has " + std::to_string(x.rows()) + " rows but the data has " +
                std::to_string(data->n_volumes()) + " volumes");
  }
  const fit::DesignBasis basis = fit::AnalyseDesign(x);
  const bool ar1 = options.noise == NoiseModel::kAr1;
  const double det = basis.m.determinant();
  if (ar1 && !(std::abs(det) > 1e-10 * basis.m(0, 0) * basis.m(1, 1))) {
    throw Error("design leaves " + std::to_string(basis.n - basis.rank) +
                " residual degrees of freedom, too few to estimate AR(1) noise; "
                "use noise: none or more volumes");
  }
  const Eigen::Matrix2d m_inverse = basis.m.inverse();
  const fit::SufficientStats s = fit::AccumulateStats(basis, data, options.threads);

  const Eigen::Index n_vox = s.yy.size();
  const Eigen::Index r = basis.rank;
  const double dof = static_cast<double>(basis.n - basis.rank);
  RunFit out;
  out.n_volumes = basis.n;
  out.rank = basis.rank;
  out.dof = basis.n - basis.rank;
  out.kept_columns = basis.kept;
  out.gram = basis.gram;
  out.beta = FilledMatrix(basis.p, n_vox, 0.0);
  out.sigma2 = Eigen::VectorXd::Constant(n_vox, kNaN);
  out.rho = Eigen::VectorXd::Constant(n_vox, kNaN);
  // 0 valid, 1 fitted, 2 non-finite, 3 zero residual variance; reduced to counts below.
  std::vector<unsigned char> state(static_cast<size_t>(n_vox), 0);

  const fit::DiagonalGram& diagonal = basis.diagonal;
  fit::ForEachChunk(n_vox, options.threads, [&](Eigen::Index v0, Eigen::Index v1) {
    const Eigen::Index w = v1 - v0;
    const auto g1 = s.g.block(0, v0, r, w);
    const auto g2 = s.g.block(r, v0, r, w);
    Eigen::MatrixXd coef(r, w);  // M^-1 c per voxel (NaN where not fitted)
    fit::WhitenedSolver solver(r);
    for (Eigen::Index j = 0; j < w; ++j) {
      const Eigen::Index v = v0 + j;
      const double yy = s.yy(v);
      unsigned char& st = state[static_cast<size_t>(v)];
      coef.col(j).setConstant(kNaN);
      if (!std::isfinite(yy) || !std::isfinite(s.offset(v)) || !std::isfinite(s.ydy(v))) {
        st = 2;
        continue;
      }
      const double s0 = yy - g1.col(j).squaredNorm();
      if (!(s0 > kZeroResidual * static_cast<double>(basis.n) * yy)) {
        st = 3;
        continue;
      }
      double rho = 0.0;
      double rss = s0;
      if (ar1) {
        const double s1 =
            s.ydy(v) + g1.col(j).dot(diagonal.lambda.cwiseProduct(g1.col(j)) - 2.0 * g2.col(j));
        rho = BiasCorrectedRho(m_inverse, s0, s1);
        // X'V^-1 y and y'V^-1 y by the Prais-Winsten identity, in the basis V.
        const double c0 = 1.0 + rho * rho;
        const double c2 = rho * rho;
        const double y0 = s.first(v);
        const double yn = s.last(v);
        coef.col(j).noalias() =
            c0 * g1.col(j) - rho * g2.col(j) - c2 * (y0 * basis.first_t + yn * basis.last_t);
        const double yvy = c0 * yy - rho * s.ydy(v) - c2 * (y0 * y0 + yn * yn);
        if (!solver.Factor(diagonal, rho)) {
          coef.col(j).setConstant(kNaN);
          st = 3;
          continue;
        }
        rss = yvy - solver.SolveInPlace(coef.col(j));
        if (!(rss > 0)) {
          coef.col(j).setConstant(kNaN);
          st = 3;
          continue;
        }
      } else {
        coef.col(j) = g1.col(j);
      }
      out.rho(v) = rho;
      out.sigma2(v) = rss / dof;
      st = 1;
    }
    // beta_k = V coef + offset a; each column of the product depends on that voxel alone.
    const Eigen::MatrixXd beta_k = diagonal.v * coef;
    for (Eigen::Index j = 0; j < w; ++j) {
      const Eigen::Index v = v0 + j;
      if (state[static_cast<size_t>(v)] != 1) {
        out.beta.col(v).setConstant(kNaN);
        continue;
      }
      for (Eigen::Index i = 0; i < r; ++i) {
        out.beta(basis.kept[i], v) = beta_k(i, j) + s.offset(v) * basis.constant_k(i);
      }
    }
  });

  out.valid.assign(static_cast<size_t>(n_vox), 0);
  for (Eigen::Index v = 0; v < n_vox; ++v) {
    const unsigned char st = state[static_cast<size_t>(v)];
    out.valid[static_cast<size_t>(v)] = st == 1;
    out.n_nonfinite += st == 2;
    out.n_constant += st == 3;
  }
  return out;
}

}  // namespace boldsum
