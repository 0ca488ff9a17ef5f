// The first-level fit of one run: OLS, bias-corrected AR(1), exact Prais-Winsten GLS
// per voxel from sufficient statistics, and contrasts. Shapes: V voxels (or regions),
// N volumes, p design columns.
#pragma once

#include <Eigen/Dense>
#include <string>
#include <vector>

#include "boldsum/config.h"

namespace boldsum {

// A run's data in time order, in blocks of whole volumes.
class BlockSource {
 public:
  virtual ~BlockSource() = default;
  virtual int n_volumes() const = 0;
  virtual int n_voxels() const = 0;
  // Fills `block` with the next rows (volumes) for all voxels; false at the end.
  virtual bool Next(Eigen::MatrixXf* block) = 0;
  // Sources whose values are doubles (ROI tables) return true and serve NextDouble()
  // instead of Next(), so that no precision is lost on the way to the fit.
  virtual bool ProvidesDoubles() const { return false; }
  virtual bool NextDouble(Eigen::MatrixXd* /*block*/) { return false; }
  // Threads the source keeps busy while it is being read (a background decoder): the
  // fit leaves that many of its threads to it until the data end.
  virtual int BackgroundThreads() const { return 0; }
};

// An in-memory N x V matrix as a BlockSource (ROI tables, tests).
class MatrixSource : public BlockSource {
 public:
  MatrixSource(const Eigen::MatrixXd& data, int block_volumes = 64);
  int n_volumes() const override;
  int n_voxels() const override;
  bool Next(Eigen::MatrixXf* block) override;
  bool ProvidesDoubles() const override { return true; }
  bool NextDouble(Eigen::MatrixXd* block) override;

 private:
  const Eigen::MatrixXd& data_;
  int block_volumes_;
  int next_row_ = 0;
};

struct FitOptions {
  NoiseModel noise = NoiseModel::kAr1;
  int threads = 1;  // results are bitwise identical for every value
};

// The three p x p matrices from which X'V^-1 X is rebuilt at any rho:
// X'V^-1 X = (1 + rho^2) xtx - rho * lag - rho^2 * ends (Prais-Winsten, V^-1 = W'W).
struct DesignGram {
  Eigen::MatrixXd xtx;   // X'X
  Eigen::MatrixXd lag;   // X'LX + X'L'X, L the lag-1 shift
  Eigen::MatrixXd ends;  // x_1 x_1' + x_N x_N' (first and last rows)
};

struct RunFit {
  int n_volumes = 0;
  int rank = 0;
  int dof = 0;                       // n_volumes - rank
  std::vector<int> kept_columns;     // a maximal independent set of columns (pivoted QR)
  DesignGram gram;                   // over all p columns
  Eigen::MatrixXd beta;              // p x V; columns not kept are 0
  Eigen::VectorXd sigma2;            // V; whitened residual variance (innovation variance)
  Eigen::VectorXd rho;               // V; 0 when noise is kNone
  std::vector<unsigned char> valid;  // V; 0 for non-finite data or zero residual variance
  int n_nonfinite = 0;               // voxels excluded for NaN/Inf values
  int n_constant = 0;                // voxels excluded for zero variance
};

// Fits every voxel of `data` against design `x` (N x p). Throws Error when N does not
// match, when rank(X) is 0, or when N <= rank(X).
RunFit FitRun(const Eigen::MatrixXd& x, BlockSource* data, const FitOptions& options);

// C beta and its covariance for a q x p contrast matrix C, per voxel.
struct ContrastEstimate {
  int q = 1;
  bool estimable = true;             // rows of C in the row space of X; if false, no values
  double dof = 0;                    // residual degrees of freedom
  Eigen::MatrixXd effect;            // q x V
  Eigen::MatrixXd covariance;        // (q*q) x V: sigma^2 C (X'V^-1 X)^-1 C', column-major
  std::vector<unsigned char> valid;  // V
};

ContrastEstimate EstimateContrast(const RunFit& fit, const Eigen::MatrixXd& c,
                                  const FitOptions& options);
// The same for several contrasts at once (one factorisation per voxel for all of them);
// element k equals EstimateContrast(fit, contrasts[k], options) bit for bit.
std::vector<ContrastEstimate> EstimateContrasts(const RunFit& fit,
                                                const std::vector<Eigen::MatrixXd>& contrasts,
                                                const FitOptions& options);
// Whether the rows of `c` (q x p) lie in the row space of the run's design: the
// `estimable` that EstimateContrast reports, without any per-voxel work.
bool IsContrastEstimable(const RunFit& fit, const Eigen::MatrixXd& c);

// t (q = 1) or F (q > 1) and the matching z, per voxel; NaN where not valid.
struct ContrastTest {
  Eigen::VectorXd stat;
  Eigen::VectorXd z;
};
ContrastTest TestContrast(const ContrastEstimate& estimate, bool is_f, int threads = 1);

}  // namespace boldsum
