// DescribeDesign, ColumnCorrelations and IsEstimable (declared in boldsum/design.h).
//
// Definitions:
//   rank: number of singular values of X above max(N, p) * eps * sigma_max.
//   condition_number: sigma_max / sigma_min of X with every non-zero column scaled to unit
//     norm; infinite when X is rank-deficient (rank < p, which includes p > N).
//   dependent: the p - rank null directions are taken as the right singular vectors of the
//     column-scaled X with the smallest singular values; a column is named when its row of
//     that basis has norm > 1e-6 (basis-independent, and free of the columns' units).
//   main regressor of a condition: its <cond> column; with the FIR basis the sum of its bins,
//     compared with the columns outside its own bins.
//   max_abs_correlation: largest |Pearson correlation| with another non-constant column.
//   variance_inflation: TSS / RSS (= 1 / (1 - R^2), centred) of the main regressor regressed
//     on every other column (least squares through the pseudo-inverse); infinite when RSS = 0
//     or the regressor is constant.
//   efficiency: 1 / trace(C (X'X)^+ C'), 0 when C is not estimable.
#include <algorithm>
#include <cmath>
#include <limits>
#include <string>

#include "boldsum/design.h"

namespace boldsum {
namespace {

constexpr double kInfinity = std::numeric_limits<double>::infinity();

struct Spectrum {
  Eigen::VectorXd singular;  // decreasing, min(N, p) values
  Eigen::MatrixXd v;         // p x p
  int rank = 0;
};

Spectrum Decompose(const Eigen::MatrixXd& x) {
  Spectrum spectrum;
  if (x.cols() == 0) return spectrum;
  Eigen::JacobiSVD<Eigen::MatrixXd> svd(x, Eigen::ComputeFullV);
  spectrum.singular = svd.singularValues();
  spectrum.v = svd.matrixV();
  const double largest = spectrum.singular.size() > 0 ? spectrum.singular(0) : 0.0;
  const double tolerance = static_cast<double>(std::max(x.rows(), x.cols())) *
                           std::numeric_limits<double>::epsilon() * largest;
  for (Eigen::Index i = 0; i < spectrum.singular.size(); ++i) {
    if (spectrum.singular(i) > tolerance) ++spectrum.rank;
  }
  return spectrum;
}

Eigen::MatrixXd ScaleColumns(const Eigen::MatrixXd& x) {
  Eigen::MatrixXd scaled = x;
  for (Eigen::Index c = 0; c < x.cols(); ++c) {
    const double norm = x.col(c).norm();
    if (norm > 0.0) scaled.col(c) /= norm;
  }
  return scaled;
}

bool IsConstant(const Eigen::VectorXd& column) {
  if (column.size() == 0) return true;
  const double range = column.maxCoeff() - column.minCoeff();
  return range <= 1e-12 * column.cwiseAbs().maxCoeff();
}

double Correlation(const Eigen::VectorXd& a, const Eigen::VectorXd& b) {
  const Eigen::VectorXd da = a.array() - a.mean();
  const Eigen::VectorXd db = b.array() - b.mean();
  return da.dot(db) / (da.norm() * db.norm());
}

// TSS / RSS of y regressed on `others` (least squares through the pseudo-inverse).
double VarianceInflation(const Eigen::VectorXd& y, const Eigen::MatrixXd& others) {
  const double tss = (y.array() - y.mean()).matrix().squaredNorm();
  if (!(tss > 0.0)) return kInfinity;
  Eigen::VectorXd residual = y;
  if (others.cols() > 0) {
    Eigen::JacobiSVD<Eigen::MatrixXd> svd(others, Eigen::ComputeThinU);
    const Eigen::VectorXd& s = svd.singularValues();
    const double tolerance = static_cast<double>(std::max(others.rows(), others.cols())) *
                             std::numeric_limits<double>::epsilon() * (s.size() ? s(0) : 0.0);
    int rank = 0;
    for (Eigen::Index i = 0; i < s.size(); ++i) rank += s(i) > tolerance ? 1 : 0;
    const Eigen::MatrixXd basis = svd.matrixU().leftCols(rank);
    residual -= basis * (basis.transpose() * y);
  }
  const double rss = residual.squaredNorm();
  return rss > 0.0 ? tss / rss : kInfinity;
}

DesignReport::PerCondition DescribeCondition(const std::string& condition,
                                             const DesignMatrix& design) {
  DesignReport::PerCondition report;
  report.condition = condition;
  Eigen::VectorXd main = Eigen::VectorXd::Zero(design.n_volumes());
  std::vector<int> own;  // the columns that make up the main regressor
  for (int c = 0; c < design.n_columns(); ++c) {
    const DesignColumn& column = design.columns[c];
    if (column.condition != condition) continue;
    if (column.kind == ColumnKind::kCondition || column.kind == ColumnKind::kFirBin) {
      main += design.x.col(c);
      own.push_back(c);
    }
  }
  std::vector<int> others;
  for (int c = 0; c < design.n_columns(); ++c) {
    if (std::find(own.begin(), own.end(), c) == own.end()) others.push_back(c);
  }
  if (own.empty() || IsConstant(main)) {
    report.variance_inflation = kInfinity;
    return report;
  }
  Eigen::MatrixXd other_columns(design.n_volumes(), static_cast<int>(others.size()));
  for (size_t i = 0; i < others.size(); ++i) {
    const int c = others[i];
    other_columns.col(static_cast<int>(i)) = design.x.col(c);
    if (IsConstant(design.x.col(c))) continue;
    const double correlation = std::abs(Correlation(main, design.x.col(c)));
    if (correlation > report.max_abs_correlation) {
      report.max_abs_correlation = correlation;
      report.most_correlated_with = design.columns[c].name;
    }
  }
  report.variance_inflation = VarianceInflation(main, other_columns);
  return report;
}

// Every row of c within 1e-8 (relative) of the span of X's leading right singular vectors.
bool IsInRowSpace(const Spectrum& spectrum, const Eigen::MatrixXd& c) {
  if (c.size() == 0) return true;
  const Eigen::MatrixXd row_space = spectrum.v.leftCols(spectrum.rank);
  const Eigen::MatrixXd outside = c - (c * row_space) * row_space.transpose();
  for (Eigen::Index r = 0; r < c.rows(); ++r) {
    if (outside.row(r).norm() > 1e-8 * c.row(r).norm()) return false;
  }
  return true;
}

}  // namespace

Eigen::MatrixXd ColumnCorrelations(const DesignMatrix& design) {
  const int p = design.n_columns();
  Eigen::MatrixXd r(p, p);
  for (int i = 0; i < p; ++i) {
    const bool constant_i = IsConstant(design.x.col(i));
    for (int j = 0; j <= i; ++j) {
      if (constant_i || IsConstant(design.x.col(j))) {
        r(i, j) = r(j, i) = std::numeric_limits<double>::quiet_NaN();
      } else {
        r(i, j) = r(j, i) = i == j ? 1.0 : Correlation(design.x.col(i), design.x.col(j));
      }
    }
  }
  return r;
}

bool IsEstimable(const Eigen::MatrixXd& x, const Eigen::MatrixXd& c) {
  if (c.cols() != x.cols()) {
    throw Error("contrast has " + std::to_string(c.cols()) + " weights but the design has " +
                std::to_string(x.cols()) + " columns");
  }
  return IsInRowSpace(Decompose(x), c);
}

DesignReport DescribeDesign(const DesignMatrix& design, const ModelSpec& model,
                            const std::vector<ContrastSpec>& contrasts) {
  DesignReport report;
  const Eigen::MatrixXd& x = design.x;
  const int p = design.n_columns();
  const Spectrum spectrum = Decompose(x);
  report.rank = spectrum.rank;

  const Spectrum scaled = Decompose(ScaleColumns(x));
  if (p == 0) {
    report.condition_number = 0.0;
  } else if (spectrum.rank < p || scaled.singular(scaled.singular.size() - 1) == 0.0) {
    report.condition_number = kInfinity;
  } else {
    report.condition_number = scaled.singular(0) / scaled.singular(scaled.singular.size() - 1);
  }
  if (spectrum.rank < p) {
    const Eigen::MatrixXd null_space = scaled.v.rightCols(p - spectrum.rank);
    for (int c = 0; c < p; ++c) {
      if (null_space.row(c).norm() > 1e-6) report.dependent.push_back(design.columns[c].name);
    }
  }

  for (const std::string& condition : model.conditions) {
    report.conditions.push_back(DescribeCondition(condition, design));
  }

  // (X'X)^+ = V_r S_r^-2 V_r', so trace(C (X'X)^+ C') = || C V_r S_r^-1 ||_F^2.
  const Eigen::MatrixXd row_space = spectrum.v.leftCols(spectrum.rank);
  const Eigen::VectorXd inverse_singular = spectrum.singular.head(spectrum.rank).cwiseInverse();
  for (const ContrastSpec& contrast : contrasts) {
    DesignReport::PerContrast entry;
    entry.contrast = contrast.name;
    const Eigen::MatrixXd c = ContrastWeights(contrast, design);
    entry.estimable = IsInRowSpace(spectrum, c);
    if (entry.estimable) {
      const double trace = ((c * row_space) * inverse_singular.asDiagonal()).squaredNorm();
      entry.efficiency = trace > 0.0 ? 1.0 / trace : kInfinity;
    }
    report.contrasts.push_back(entry);
  }
  return report;
}

}  // namespace boldsum
