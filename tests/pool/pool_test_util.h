// Simulated group data and a dense restricted log-likelihood for the pool tests.
#pragma once

#include <Eigen/Dense>
#include <cmath>
#include <random>

namespace boldsum {

// n x k: an intercept, then standard normal columns.
inline Eigen::MatrixXd RandomDesign(int n, int k, std::mt19937_64* random) {
  std::normal_distribution<double> normal;
  Eigen::MatrixXd z(n, k);
  for (int i = 0; i < n; ++i) {
    z(i, 0) = 1.0;
    for (int j = 1; j < k; ++j) z(i, j) = normal(*random);
  }
  return z;
}

// First-level variances spread over a factor of 20.
inline Eigen::VectorXd RandomVariances(int n, std::mt19937_64* random) {
  std::uniform_real_distribution<double> uniform(0.1, 2.0);
  Eigen::VectorXd v(n);
  for (int i = 0; i < n; ++i) v[i] = uniform(*random);
  return v;
}

// y = Z b + N(0, tau2 + v_i) with b = (1, -0.5, 0.25, ...).
inline Eigen::VectorXd RandomEstimates(const Eigen::MatrixXd& z, const Eigen::VectorXd& v,
                                       double tau2, std::mt19937_64* random) {
  std::normal_distribution<double> normal;
  Eigen::VectorXd b(z.cols());
  for (int j = 0; j < z.cols(); ++j) b[j] = std::pow(-0.5, j);
  Eigen::VectorXd y = z * b;
  for (int i = 0; i < y.size(); ++i) y[i] += std::sqrt(tau2 + v[i]) * normal(*random);
  return y;
}

// The restricted log-likelihood of Harville (1977, JASA 72:320-338) up to a constant:
// -1/2 [log|V| + log|Z'V^-1 Z| + y'Py], V = diag(tau2 + v), P = V^-1 - V^-1 Z (Z'V^-1 Z)^-1 Z'V^-1.
// Evaluated through the QR decomposition of V^-1/2 Z = QR, which stays accurate when the
// variances span many orders of magnitude: log|Z'V^-1 Z| = 2 sum log|R_jj| and
// y'Py = |(I - QQ') V^-1/2 y|^2.
inline double RestrictedLogLikelihood(const Eigen::MatrixXd& z, const Eigen::VectorXd& y,
                                      const Eigen::VectorXd& v, double tau2) {
  const Eigen::VectorXd root_w = (v.array() + tau2).rsqrt();
  const Eigen::MatrixXd scaled_z = root_w.asDiagonal() * z;
  const Eigen::VectorXd scaled_y = root_w.cwiseProduct(y);
  const Eigen::HouseholderQR<Eigen::MatrixXd> qr(scaled_z);
  const Eigen::MatrixXd q =
      qr.householderQ() * Eigen::MatrixXd::Identity(z.rows(), z.cols());
  const Eigen::VectorXd residual = scaled_y - q * (q.transpose() * scaled_y);
  double log_det_a = 0;
  for (Eigen::Index j = 0; j < z.cols(); ++j) {
    log_det_a += 2 * std::log(std::abs(qr.matrixQR()(j, j)));
  }
  const double log_det_v = (v.array() + tau2).log().sum();
  return -0.5 * (log_det_v + log_det_a + residual.squaredNorm());
}

}  // namespace boldsum
