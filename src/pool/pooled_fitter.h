// The per-voxel group fit behind FitPooled and PoolVoxels, with the workspace and the
// orthonormal basis of the design kept between voxels (one fitter per thread).
#pragma once

#include <Eigen/Dense>
#include <vector>

#include "boldsum/pool.h"

namespace boldsum {

class PooledFitter {
 public:
  PooledFitter(const Eigen::MatrixXd& z, PoolMethod method, const RemlOptions& options);

  // y and v point to n values (one subject each). Rows with a non-finite value or
  // v <= 0 are dropped; see FitPooled.
  void Fit(const double* y, const double* v, PooledFit* out);

 private:
  // The restricted log-likelihood and its derivatives at one tau2 (Harville 1977, JASA
  // 72:320-338): with P = W - W Q (Q'WQ)^-1 Q'W, score = (y'PPy - tr P) / 2, expected
  // information tr(PP) / 2, observed information y'PPPy - tr(PP) / 2.
  struct Derivatives {
    double score = 0, expected = 0, observed = 0, log_likelihood = 0;
  };
  Derivatives Evaluate(double tau2);
  double SolveReml(int* iterations, bool* converged);
  double Search(double x, Derivatives d, double lo, double hi, int* iterations,
                bool* converged);
  double last_likelihood_ = 0;
  std::vector<double> grid_x_;       // REML scan points
  std::vector<Derivatives> grid_d_;
  void WeightedFit(const Eigen::VectorXd& w, PooledFit* out);
  bool PrepareBasis();

  Eigen::MatrixXd z_;
  PoolMethod method_;
  RemlOptions options_;
  int k_;

  std::vector<int> rows_;       // kept rows of the current voxel
  std::vector<int> basis_rows_; // rows the basis below was built for
  bool basis_full_rank_ = false;
  Eigen::MatrixXd q_;           // m x k, orthonormal columns spanning Z[rows_]
  Eigen::MatrixXd t_;           // k x k; beta = t_ * gamma (column pivots and R^-1)

  // Workspace, sized per voxel.
  Eigen::VectorXd y_, v_, w_, p_, s_;
  Eigen::MatrixXd a_, c_, b_, bc_;
  Eigen::VectorXd g_, gamma_;
  Eigen::LLT<Eigen::MatrixXd> llt_;
};

}  // namespace boldsum
