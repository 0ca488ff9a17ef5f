// One run's design matrix, built from the model spec, the run's events and its
// confounds; contrast weights resolved over its named columns; and the diagnostics
// that `boldsum check` prints.
#pragma once

#include <Eigen/Dense>
#include <string>
#include <vector>

#include "boldsum/config.h"
#include "boldsum/error.h"

namespace boldsum {

enum class ColumnKind { kCondition, kTimeDerivative, kDispersionDerivative, kFirBin,
                        kConfound, kCensor, kDrift, kIntercept };

struct DesignColumn {
  std::string name;       // unique within the run; see DEVELOPERS.md for the scheme
  ColumnKind kind;
  std::string condition;  // the condition a task column belongs to, else ""
};

// Rows are volumes (k = 0..N-1), columns follow `columns`. Column order: condition
// regressors (each followed by its derivatives or FIR bins), confounds, censor
// indicators, drift, intercept.
struct DesignMatrix {
  Eigen::MatrixXd x;
  std::vector<DesignColumn> columns;

  int n_volumes() const { return static_cast<int>(x.rows()); }
  int n_columns() const { return static_cast<int>(x.cols()); }
  std::vector<std::string> names() const;
};

// A run's confounds: the model's confound columns (in model order) with one row per
// volume, `n/a` cells already replaced by the documented rule (the mean of the
// column's numeric cells), and the censoring signal when the model censors.
struct ConfoundTable {
  std::string path;                // "" when the run has no confounds file
  std::vector<std::string> names;  // == model.confounds
  Eigen::MatrixXd values;          // rows = volumes
  Eigen::VectorXd censor_signal;   // empty unless model.censor; n/a reads as 0
};

// Reads run.confounds_path and selects the model's columns. Throws Error at the file
// (and line/column where there is one) for a missing column, a non-numeric cell, or a
// column that is entirely n/a.
ConfoundTable LoadConfounds(const ModelSpec& model, const RunSpec& run);

// Builds the design of one run with n_volumes volumes. Problems that make the design
// unusable throw Error (e.g. a confounds table whose row count differs from
// n_volumes, naming both counts); doubtful but usable inputs (events after the end of
// the scan, a condition without events) become warnings located at `run.where`.
DesignMatrix BuildDesign(const ModelSpec& model, const RunSpec& run,
                         const ConfoundTable& confounds, int n_volumes,
                         Diagnostics* warnings);

// Contrast weights over the design's columns: q x p (q = 1 for a t contrast). Throws
// Error naming the key when a key is neither a condition nor a column of this design.
Eigen::MatrixXd ContrastWeights(const ContrastSpec& contrast, const DesignMatrix& design);

struct DesignReport {
  int rank = 0;
  double condition_number = 0.0;        // of X with columns scaled to unit norm
  std::vector<std::string> dependent;   // columns involved in a rank deficiency
  struct PerCondition {
    std::string condition;
    double max_abs_correlation = 0.0;    // with any other non-constant column
    std::string most_correlated_with;
    double variance_inflation = 0.0;     // 1 / (1 - R^2) of the main regressor
  };
  std::vector<PerCondition> conditions;
  struct PerContrast {
    std::string contrast;
    double efficiency = 0.0;             // 1 / trace(C (X'X)^-1 C'); 0 if not estimable
    bool estimable = true;
  };
  std::vector<PerContrast> contrasts;
};

DesignReport DescribeDesign(const DesignMatrix& design, const ModelSpec& model,
                            const std::vector<ContrastSpec>& contrasts);

// Pearson correlations of every pair of design columns (p x p, 1 on the diagonal); NaN in
// the rows and columns of constant columns (the intercept, an all-zero condition).
Eigen::MatrixXd ColumnCorrelations(const DesignMatrix& design);

// True when every row of C lies in the row space of X (relative tolerance 1e-8).
bool IsEstimable(const Eigen::MatrixXd& x, const Eigen::MatrixXd& c);

// design.tsv: header of column names, one row per volume, values with 17 significant
// digits so the file reproduces the matrix exactly.
std::string DesignToTsv(const DesignMatrix& design);

// design.svg: the matrix as a grey-scale image (each column scaled to its own range),
// with column labels; self-contained.
std::string DesignToSvg(const DesignMatrix& design, const std::string& title);

// Text with & < > " ' replaced by their XML entities, for SVG (and HTML) text and
// attribute values.
std::string EscapeXml(const std::string& text);

}  // namespace boldsum
