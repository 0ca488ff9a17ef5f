// Runs -> subject: inverse-variance fixed effects. Scalar case: Hedges & Olkin (1985),
// Statistical Methods for Meta-Analysis, ch. 6; the q-vector case is the generalised
// least-squares estimate of a common mean from independent estimates with known
// covariances (Aitken 1935, Proc. R. Soc. Edinburgh 55:42-48).
#include <Eigen/Cholesky>
#include <Eigen/Dense>
#include <cmath>
#include <limits>
#include <string>

#include "boldsum/combine.h"
#include "boldsum/error.h"

namespace boldsum {
namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

// A covariance whose correlation form has a reciprocal condition number below this is
// treated as singular: its inverse would carry fewer than ~4 correct digits (common
// practice: rcond near 1e-12 is numerically singular in double precision).
constexpr double kMinReciprocalCondition = 1e-12;

std::string Describe(const char* what, long long rows, long long cols) {
  return std::string(what) + " is " + std::to_string(rows) + " x " + std::to_string(cols);
}

void CheckShapes(const std::vector<const ContrastEstimate*>& runs) {
  if (runs.empty()) throw Error("fixed-effects combination: no runs given");
  const ContrastEstimate* first = runs[0];
  for (std::size_t r = 0; r < runs.size(); ++r) {
    const ContrastEstimate* run = runs[r];
    const std::string prefix = "fixed-effects combination: run " + std::to_string(r + 1) + ": ";
    if (run == nullptr) throw Error(prefix + "missing (null) estimate");
    if (!run->estimable) throw Error(prefix + "contrast is not estimable; leave the run out");
    if (run->q < 1) throw Error(prefix + "q = " + std::to_string(run->q) + " (must be >= 1)");
    if (run->q != first->q) {
      throw Error(prefix + "q = " + std::to_string(run->q) + ", but run 1 has q = " +
                  std::to_string(first->q));
    }
    const long long q = run->q;
    const long long voxels = first->effect.cols();
    if (run->effect.rows() != q || run->effect.cols() != voxels) {
      throw Error(prefix + Describe("effect", run->effect.rows(), run->effect.cols()) +
                  ", expected " + std::to_string(q) + " x " + std::to_string(voxels));
    }
    if (run->covariance.rows() != q * q || run->covariance.cols() != voxels) {
      throw Error(prefix + Describe("covariance", run->covariance.rows(),
                                    run->covariance.cols()) +
                  ", expected " + std::to_string(q * q) + " x " + std::to_string(voxels));
    }
    if (static_cast<long long>(run->valid.size()) != voxels) {
      throw Error(prefix + "valid has " + std::to_string(run->valid.size()) +
                  " entries, expected " + std::to_string(voxels));
    }
    if (!(run->dof > 0)) {
      throw Error(prefix + "dof = " + std::to_string(run->dof) + " (must be > 0)");
    }
  }
}

// Adds W = cov^-1 to `weight_sum` and W e to `weighted_effect`. False when cov is not
// finite, not positive definite, or numerically singular (see kMinReciprocalCondition).
bool AddInverse(const Eigen::Ref<const Eigen::MatrixXd>& cov,
                const Eigen::Ref<const Eigen::VectorXd>& effect, Eigen::MatrixXd* weight_sum,
                Eigen::VectorXd* weighted_effect) {
  if (!cov.allFinite() || !effect.allFinite()) return false;
  if (cov.rows() == 1) {
    const double v = cov(0, 0);
    if (!(v > 0)) return false;
    (*weight_sum)(0, 0) += 1.0 / v;
    (*weighted_effect)(0) += effect(0) / v;
    return true;
  }
  const Eigen::VectorXd diag = cov.diagonal();
  if (!(diag.array() > 0).all()) return false;
  // The correlation form D^-1/2 cov D^-1/2 makes the singularity test scale-free.
  const Eigen::VectorXd scale = diag.cwiseSqrt().cwiseInverse();
  const Eigen::MatrixXd correlation = scale.asDiagonal() * cov * scale.asDiagonal();
  const Eigen::LLT<Eigen::MatrixXd> llt(correlation);
  if (llt.info() != Eigen::Success || !(llt.rcond() >= kMinReciprocalCondition)) return false;
  // cov^-1 = D^-1/2 correlation^-1 D^-1/2.
  Eigen::MatrixXd inverse = llt.solve(Eigen::MatrixXd::Identity(cov.rows(), cov.cols()));
  inverse = scale.asDiagonal() * inverse * scale.asDiagonal();
  inverse = 0.5 * (inverse + inverse.transpose());
  *weight_sum += inverse;
  *weighted_effect += inverse * effect;
  return true;
}

}  // namespace

ContrastEstimate CombineFixedEffects(const std::vector<const ContrastEstimate*>& runs) {
  CheckShapes(runs);
  const int q = runs[0]->q;
  const Eigen::Index voxels = runs[0]->effect.cols();

  ContrastEstimate out;
  out.q = q;
  out.estimable = true;
  out.dof = 0;
  for (const ContrastEstimate* run : runs) out.dof += run->dof;
  out.effect.setConstant(q, voxels, kNaN);
  out.covariance.setConstant(q * q, voxels, kNaN);
  out.valid.assign(static_cast<std::size_t>(voxels), 0);

  Eigen::MatrixXd weight_sum(q, q);
  Eigen::VectorXd weighted_effect(q);
  for (Eigen::Index v = 0; v < voxels; ++v) {
    bool ok = true;
    for (const ContrastEstimate* run : runs) ok = ok && run->valid[v] != 0;
    if (!ok) continue;
    weight_sum.setZero();
    weighted_effect.setZero();
    for (const ContrastEstimate* run : runs) {
      const Eigen::Map<const Eigen::MatrixXd> cov(run->covariance.col(v).data(), q, q);
      ok = AddInverse(cov, run->effect.col(v), &weight_sum, &weighted_effect);
      if (!ok) break;
    }
    if (!ok) continue;
    if (q == 1) {  // all weights are positive, so the sum is too
      out.effect(0, v) = weighted_effect(0) / weight_sum(0, 0);
      out.covariance(0, v) = 1.0 / weight_sum(0, 0);
      out.valid[v] = 1;
      continue;
    }
    // Cov = (sum W_r)^-1 and effect = Cov sum W_r e_r, through one Cholesky factor.
    const Eigen::LLT<Eigen::MatrixXd> llt(weight_sum);
    if (llt.info() != Eigen::Success) continue;
    Eigen::MatrixXd cov = llt.solve(Eigen::MatrixXd::Identity(q, q));
    cov = 0.5 * (cov + cov.transpose());
    out.effect.col(v) = llt.solve(weighted_effect);
    out.covariance.col(v) = Eigen::Map<const Eigen::VectorXd>(cov.data(), q * q);
    out.valid[v] = 1;
  }
  return out;
}

}  // namespace boldsum
