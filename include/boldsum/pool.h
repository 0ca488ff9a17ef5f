// The group stage: first-level estimates and variances of many subjects pooled per voxel
// or region with the two-stage summary-statistics model
//   y_i = z_i' beta + u_i + e_i,   Var(y_i) = tau2 + v_i,
// v_i the first-level variance of subject i, tau2 >= 0 the between-subject variance.
// Shapes: n subjects, k group design columns, V voxels (or regions).
#pragma once

#include <Eigen/Dense>
#include <cstdint>
#include <map>
#include <string>
#include <vector>

#include "boldsum/error.h"

namespace boldsum {

// kMixed: tau2 by REML, beta by weighted least squares with w_i = 1 / (tau2 + v_i).
// kOls:   ordinary least squares on the estimates, v_i ignored; sigma2 = RSS / (n - k).
// kFixed: tau2 = 0 (inverse-variance weighting by the first-level variances only).
enum class PoolMethod { kMixed, kOls, kFixed };

const char* PoolMethodName(PoolMethod method);  // "mixed", "ols", "fixed"

struct RemlOptions {
  double relative_tolerance = 1e-10;  // stop when |step| <= tolerance * tau2
  int max_iterations = 100;           // Newton steps after the scan; a voxel that needs
                                      // more is flagged not converged
};

// The fit at one voxel.
struct PooledFit {
  bool valid = false;          // false when n <= k or the kept rows of Z lose rank
  int n = 0;                   // subjects used (rows kept)
  double tau2 = 0.0;           // kMixed: REML; kFixed: 0; kOls: NaN
  double sigma2 = 0.0;         // kOls: RSS / (n - k); otherwise NaN
  Eigen::VectorXd beta;        // k
  Eigen::MatrixXd covariance;  // k x k; (Z'WZ)^-1, or sigma2 (Z'Z)^-1 for kOls
  int iterations = 0;          // kMixed: likelihood evaluations after the one at tau2 = 0
                               // (scan and Newton steps); 0 for kOls/kFixed
  bool converged = true;       // false when max_iterations ran out (result still reported)
};

// Fits one voxel. z is n x k; y and v have n entries. Row i is dropped when y_i or v_i
// is not finite or v_i <= 0 (for every method, so that n is the same for all three).
// Never throws for bad data: an unusable voxel comes back with valid == false.
PooledFit FitPooled(const Eigen::MatrixXd& z, const Eigen::VectorXd& y, const Eigen::VectorXd& v,
                    PoolMethod method, const RemlOptions& options = {});

// A group contrast over the design columns: one row (t) or q rows (F), q x k.
struct GroupContrast {
  std::string name;  // [A-Za-z0-9_-]+; used in file names
  Eigen::MatrixXd weights;
  bool is_f = false;
  SourceLocation where;
};

// Per voxel results of one group contrast; NaN where the voxel is not valid. For a t
// contrast: estimate c'beta, variance c'Cov c, stat = t with n - k dof, z = ZFromT.
// For an F contrast: estimate and variance are NaN, stat = F with (q, n - k) dof,
// z = ZFromF.
struct PooledContrastMaps {
  Eigen::VectorXd estimate, variance, stat, z, dof;
};

struct PooledMaps {
  Eigen::VectorXd n;             // subjects used (0 where none)
  Eigen::VectorXd tau2;          // NaN for kOls or invalid voxels
  Eigen::VectorXd sigma2;        // NaN unless kOls
  std::vector<int> iterations;   // REML steps per voxel
  std::vector<unsigned char> converged;
  std::vector<PooledContrastMaps> contrasts;  // in the order given
};

// Fits every column of `estimates` and `variances` (n x V each, column = voxel) against
// z (n x k) and evaluates every contrast. Voxels are split into fixed chunks spread over
// `threads` threads (0 means the hardware count); every voxel is computed alone, so
// the result is bitwise identical for any thread count. Throws Error on shape mismatch.
PooledMaps PoolVoxels(const Eigen::MatrixXd& z, const Eigen::MatrixXd& estimates,
                      const Eigen::MatrixXd& variances,
                      const std::vector<GroupContrast>& contrasts, PoolMethod method,
                      int threads, const RemlOptions& options = {});

// ---------------------------------------------------------------------------------------
// The group model config (YAML; every key documented in configs/group_reference.yaml).

struct CovariateSpec {
  std::string column;   // participants column, also the design column name
  bool centre = true;
  double mean = 0.0;    // the mean that was subtracted (over the subjects analysed)
};

enum class FactorCoding { kDifferences, kCellMeans };

struct FactorSpec {
  std::string column;               // "" when the design has no factor
  std::vector<std::string> levels;  // first level is the reference for kDifferences
  FactorCoding coding = FactorCoding::kDifferences;
};

// The group design matrix, one row per subject of the input (input order).
struct GroupDesign {
  std::vector<std::string> columns;  // intercept, covariates, factor columns
  Eigen::MatrixXd z;                 // n x k
  bool intercept = true;
  std::vector<CovariateSpec> covariates;
  FactorSpec factor;
};

enum class PoolInputKind { kImages, kRegions };

struct PoolInput {
  PoolInputKind kind = PoolInputKind::kImages;
  std::string folder;         // pool-ready folder (images) or the folder of the table
  std::string table_path;     // kRegions: the summaries table
  std::vector<std::string> subjects;  // input order (volume / first appearance order)
  std::vector<std::string> contrasts; // first-level contrasts available, sorted
};

struct GroupSpec {
  std::string config_path;  // absolute
  PoolInput input;
  std::vector<std::string> first_level_contrasts;  // to pool, in config order
  std::string participants_path;                   // "" when not given
  GroupDesign design;
  std::vector<GroupContrast> contrasts;
  PoolMethod method = PoolMethod::kMixed;
  std::string output_dir;  // absolute
};

struct LoadedGroupConfig {
  GroupSpec spec;           // meaningful only when !diagnostics.HasErrors()
  Diagnostics diagnostics;  // every problem found, in the order checked
};

// Reads and validates the group config and everything it names short of the voxel
// data: the input's subject list and contrasts, the participants table (every subject
// of the input must be in it), the design (full column rank) and the contrasts.
// Never throws for problems in the inputs: they all go to diagnostics.
LoadedGroupConfig LoadGroupConfig(const std::string& path);

struct PoolRunOptions {
  int threads = 0;  // 0 means the hardware count; results do not depend on it
  RemlOptions reml;
  // Images are read in slabs of mask voxels whose estimates and variances (16 bytes per
  // subject and voxel) fit in this many bytes, each stack decompressed once per slab.
  // Larger means fewer passes over the files; results do not depend on it.
  int64_t slab_bytes = int64_t{1} << 30;
};

// What RunPool did, per first-level contrast (also written to summary.json).
struct PoolContrastSummary {
  std::string contrast;
  int units = 0;            // voxels in the mask, or regions
  int units_valid = 0;      // with n > k
  int boundary = 0;         // kMixed: voxels with tau2 = 0
  int not_converged = 0;
  int iterations_median = 0, iterations_max = 0;
  int n_min = 0, n_max = 0;
};

struct PoolSummary {
  std::vector<std::string> files_written;
  std::vector<PoolContrastSummary> contrasts;
};

// Reads the data, fits every voxel/region of every first-level contrast, and writes the
// outputs (layout in src/pool/pool_outputs.h). All data are read and checked before
// the first file is written; each file is written atomically. Throws Error.
PoolSummary RunPool(const GroupSpec& spec, const PoolRunOptions& options);

}  // namespace boldsum
