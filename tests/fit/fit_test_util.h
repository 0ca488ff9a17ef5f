// Synthetic designs and data for the fit tests, and a dense reference fit that follows
// the published formulas literally (explicit N x N matrices, no sufficient statistics).
#pragma once

#include <Eigen/Dense>
#include <cmath>
#include <random>
#include <vector>

namespace boldsum {
namespace fit_test {

// Difference of gammas (shapes 6 and 16, scale 1 s, second weighted 1/6) sampled every
// dt seconds on [0, 32) s and scaled to unit area (common practice).
inline Eigen::VectorXd Hrf(double dt) {
  const int n = static_cast<int>(32.0 / dt);
  Eigen::VectorXd h(n);
  for (int i = 0; i < n; ++i) {
    const double t = i * dt;
    auto gamma_pdf = [t](double k) {
      return t <= 0 ? 0.0 : std::exp((k - 1) * std::log(t) - t - std::lgamma(k));
    };
    h(i) = gamma_pdf(6) - gamma_pdf(16) / 6.0;
  }
  return h / (h.sum() * dt);
}

// N x p: `conditions` alternating 15 s blocks convolved with the HRF, cosine drift
// cos(pi j (k + 0.5) / N) for j = 1..floor(2 N TR / 128), and an intercept (last column).
inline Eigen::MatrixXd BlockDesign(int n, double tr, int conditions = 2) {
  const double dt = tr / 16.0;
  const Eigen::VectorXd h = Hrf(dt);
  const int fine = static_cast<int>(n * tr / dt);
  const int drift = static_cast<int>(std::floor(2.0 * n * tr / 128.0));
  Eigen::MatrixXd x = Eigen::MatrixXd::Zero(n, conditions + drift + 1);
  for (int c = 0; c < conditions; ++c) {
    Eigen::VectorXd box = Eigen::VectorXd::Zero(fine);
    for (double onset = 8.0 + 15.0 * c; onset < n * tr; onset += 15.0 * (conditions + 1)) {
      for (int i = 0; i < fine; ++i) box(i) = (i * dt >= onset && i * dt < onset + 15.0) ? 1 : box(i);
    }
    for (int k = 0; k < n; ++k) {
      const int at = static_cast<int>((k + 0.5) * tr / dt);
      double s = 0;
      for (int i = 0; i < h.size() && i <= at; ++i) s += h(i) * box(at - i);
      x(k, c) = s * dt;
    }
  }
  for (int j = 1; j <= drift; ++j) {
    for (int k = 0; k < n; ++k) x(k, conditions + j - 1) = std::cos(M_PI * j * (k + 0.5) / n);
  }
  x.col(x.cols() - 1).setOnes();
  return x;
}

// N x V stationary AR(1) noise with unit innovation variance and lag-1 correlation
// rhos(v).
inline Eigen::MatrixXd Ar1Noise(int n, const Eigen::VectorXd& rhos, std::mt19937_64* rng) {
  std::normal_distribution<double> normal;
  Eigen::MatrixXd e(n, rhos.size());
  for (Eigen::Index v = 0; v < rhos.size(); ++v) {
    e(0, v) = normal(*rng) / std::sqrt(1 - rhos(v) * rhos(v));
    for (int k = 1; k < n; ++k) e(k, v) = rhos(v) * e(k - 1, v) + normal(*rng);
  }
  return e;
}

// The values the fit sees: data blocks are float32.
inline Eigen::MatrixXd AsFloat(const Eigen::MatrixXd& y) {
  return y.cast<float>().cast<double>();
}

// Bias-corrected lag-1 correlation of Worsley et al. (2002, NeuroImage 15:1-15) from
// explicit N x N matrices: R = I - X X^+, D1 = L + L', m_jk = tr(R Dj R Dk),
// m (g0, g1) = (e'e, e'D1 e), rho = g1 / g0 clamped to [-0.99, 0.99]. X of full rank.
inline double DenseRho(const Eigen::MatrixXd& x, const Eigen::VectorXd& y) {
  const Eigen::Index n = x.rows();
  const Eigen::MatrixXd q = x.householderQr().householderQ() * Eigen::MatrixXd::Identity(n, x.cols());
  const Eigen::MatrixXd r = Eigen::MatrixXd::Identity(n, n) - q * q.transpose();
  Eigen::MatrixXd d = Eigen::MatrixXd::Zero(n, n);
  for (Eigen::Index k = 1; k < n; ++k) d(k, k - 1) = d(k - 1, k) = 1;
  Eigen::Matrix2d m;
  m(0, 0) = (r * r).trace();
  m(0, 1) = m(1, 0) = (r * r * d).trace();
  m(1, 1) = (r * d * r * d).trace();
  const Eigen::VectorXd e = r * y;
  const Eigen::Vector2d g = m.partialPivLu().solve(Eigen::Vector2d(e.dot(e), e.dot(d * e)));
  return std::clamp(g(1) / g(0), -0.99, 0.99);
}

// Prais-Winsten whitening (Prais & Winsten 1954): (W a)_0 = sqrt(1 - rho^2) a_0,
// (W a)_k = a_k - rho a_{k-1}.
inline Eigen::MatrixXd PraisWinsten(const Eigen::MatrixXd& a, double rho) {
  Eigen::MatrixXd w(a.rows(), a.cols());
  w.row(0) = std::sqrt(1 - rho * rho) * a.row(0);
  for (Eigen::Index k = 1; k < a.rows(); ++k) w.row(k) = a.row(k) - rho * a.row(k - 1);
  return w;
}

struct DenseGls {
  Eigen::VectorXd beta;
  double sigma2 = 0;
  Eigen::MatrixXd cov_unscaled;  // (X'V^-1 X)^-1
};

// GLS by ordinary least squares on the whitened data (Householder QR of W X), the
// residual sum of squares from the whitened residuals themselves (no cancellation).
inline DenseGls DenseFit(const Eigen::MatrixXd& x, const Eigen::VectorXd& y, double rho) {
  const Eigen::MatrixXd wx = PraisWinsten(x, rho);
  const Eigen::VectorXd wy = PraisWinsten(y, rho);
  Eigen::HouseholderQR<Eigen::MatrixXd> qr(wx);
  DenseGls out;
  out.beta = qr.solve(wy);
  out.sigma2 = (wy - wx * out.beta).squaredNorm() / static_cast<double>(x.rows() - x.cols());
  const Eigen::MatrixXd rt = qr.matrixQR().topRows(x.cols()).triangularView<Eigen::Upper>();
  const Eigen::MatrixXd rinv = rt.triangularView<Eigen::Upper>().solve(
      Eigen::MatrixXd::Identity(x.cols(), x.cols()));
  out.cov_unscaled = rinv * rinv.transpose();
  return out;
}

inline double MaxRelError(const Eigen::MatrixXd& got, const Eigen::MatrixXd& want) {
  return (got - want).cwiseAbs().maxCoeff() / std::max(want.cwiseAbs().maxCoeff(), 1e-300);
}

}  // namespace fit_test
}  // namespace boldsum
