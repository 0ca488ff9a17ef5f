#include "report/residual_whiteness.h"

#include <cmath>
#include <cstring>
#include <limits>
#include <sstream>

#include "boldsum/fit.h"
#include "boldsum/study.h"
#include "stats/ljung_box.h"

namespace boldsum {
namespace {

constexpr float kNaNf = std::numeric_limits<float>::quiet_NaN();
constexpr int kBlockVolumes = 32;
constexpr const char* kCacheMagic = "boldsum residual diagnostics 1";

// Whitens consecutive blocks of residuals of many series and accumulates their
// autocorrelations.
class WhitenedSeries {
 public:
  WhitenedSeries(const Eigen::VectorXd& rho, int lags)
      : rho_(rho), previous_(Eigen::VectorXd::Zero(rho.size())),
        accumulator_(static_cast<int>(rho.size()), lags) {}

  // `residual`: rows = the next volumes, columns = series. Whitened in place (one series
  // at a time, its values contiguous), then accumulated.
  void Add(Eigen::MatrixXd* residual) {
    const Eigen::Index b = residual->rows();
    if (b == 0) return;
    for (Eigen::Index v = 0; v < residual->cols(); ++v) {
      double* e = residual->col(v).data();
      const double rho = rho_(v);
      const double last = e[b - 1];
      for (Eigen::Index t = b - 1; t > 0; --t) e[t] -= rho * e[t - 1];
      e[0] = first_ ? std::sqrt(1.0 - rho * rho) * e[0] : e[0] - rho * previous_(v);
      previous_(v) = last;
    }
    first_ = false;
    accumulator_.Add(*residual);
  }

  RunWhiteness Test(const std::vector<unsigned char>& valid, int model_df) const {
    const Eigen::MatrixXd r = accumulator_.Autocorrelations();
    RunWhiteness out;
    out.q.assign(valid.size(), kNaNf);
    out.p.assign(valid.size(), kNaNf);
    std::vector<double> column(static_cast<size_t>(r.rows()));
    for (Eigen::Index v = 0; v < r.cols(); ++v) {
      if (!valid[static_cast<size_t>(v)]) continue;
      for (Eigen::Index k = 0; k < r.rows(); ++k) column[static_cast<size_t>(k)] = r(k, v);
      const LjungBoxResult test = LjungBox(column, accumulator_.n_values(), model_df);
      if (!std::isfinite(test.p)) continue;
      out.q[static_cast<size_t>(v)] = static_cast<float>(test.q);
      out.p[static_cast<size_t>(v)] = static_cast<float>(test.p);
      ++out.tested;
      out.flagged += test.p < kWhitenessAlpha;
    }
    return out;
  }

 private:
  Eigen::VectorXd rho_;
  Eigen::VectorXd previous_;  // each series' last residual before whitening
  bool first_ = true;
  AutocorrelationAccumulator accumulator_;
};

void CheckRecord(const SubjectPlan& plan, const FitRecord& record) {
  const std::string where = "subject " + plan.spec->id + ": saved fit";
  if (record.runs.size() != plan.runs.size()) {
    throw Error(where + " has " + std::to_string(record.runs.size()) + " runs; the config has " +
                std::to_string(plan.runs.size()));
  }
  for (size_t r = 0; r < plan.runs.size(); ++r) {
    if (record.runs[r].beta.rows() != plan.runs[r].design.n_columns() ||
        record.runs[r].n_volumes != plan.runs[r].n_volumes) {
      throw Error(where + " does not match run " + std::to_string(plan.runs[r].index) +
                  "'s design; refit the subject");
    }
  }
}

// beta with the columns of invalid voxels set to zero, so their residuals stay finite
// (they are not tested).
Eigen::MatrixXd UsableBeta(const RunFit& fit) {
  Eigen::MatrixXd beta = fit.beta;
  for (Eigen::Index v = 0; v < beta.cols(); ++v) {
    if (!fit.valid[static_cast<size_t>(v)]) beta.col(v).setZero();
  }
  return beta;
}

Eigen::VectorXd UsableRho(const RunFit& fit, NoiseModel noise) {
  Eigen::VectorXd rho = Eigen::VectorXd::Zero(fit.rho.size());
  if (noise != NoiseModel::kAr1) return rho;
  for (Eigen::Index v = 0; v < rho.size(); ++v) {
    if (fit.valid[static_cast<size_t>(v)]) rho(v) = fit.rho(v);
  }
  return rho;
}

template <typename T>
void AppendArray(std::string* out, const std::vector<T>& values) {
  out->append(reinterpret_cast<const char*>(values.data()), values.size() * sizeof(T));
}

template <typename T>
bool ReadArray(std::istream& in, size_t n, std::vector<T>* values) {
  values->resize(n);
  in.read(reinterpret_cast<char*>(values->data()), static_cast<std::streamsize>(n * sizeof(T)));
  return static_cast<size_t>(in.gcount()) == n * sizeof(T);
}

}  // namespace

int WhitenessModelDf(NoiseModel noise) { return noise == NoiseModel::kAr1 ? 1 : 0; }

double ResidualDiagnostics::share() const {
  return tested > 0 ? static_cast<double>(flagged) / tested : std::nan("");
}

ResidualDiagnostics MeasureResiduals(const SubjectPlan& plan, const FitRecord& record,
                                     NoiseModel noise) {
  CheckRecord(plan, record);
  ResidualDiagnostics out;
  const int model_df = WhitenessModelDf(noise);
  const bool images = plan.kind == DataKind::kImage;
  Eigen::VectorXd grid_sum;
  int64_t grid_volumes = 0;
  for (size_t r = 0; r < plan.runs.size(); ++r) {
    const RunPlan& run = plan.runs[r];
    const RunFit& fit = record.runs[r];
    const Eigen::MatrixXd beta = UsableBeta(fit);
    WhitenedSeries series(UsableRho(fit, noise), kWhitenessLags);
    if (!images) {
      Eigen::MatrixXd residual = run.regions.values - run.design.x * beta;
      series.Add(&residual);
    } else {
      const int64_t n_grid = run.geometry.n_voxels();
      if (grid_sum.size() == 0) grid_sum = Eigen::VectorXd::Zero(n_grid);
      VolumeStream stream(run.spec->data_path, record.voxels, kBlockVolumes, /*sum_grid=*/true);
      Eigen::MatrixXf block;
      Eigen::MatrixXd residual;  // reused from block to block
      int row = 0;
      while (stream.Next(&block)) {
        if (IsInterrupted()) throw Error("interrupted");
        const Eigen::Index b = block.rows();
        if (row + b > run.n_volumes)
          throw Error(run.spec->data_path + ": more volumes than planned");
        residual = block.cast<double>();  // same shape from block to block: no allocation
        residual.noalias() -= run.design.x.middleRows(row, b) * beta;
        series.Add(&residual);
        row += static_cast<int>(b);
      }
      if (row != run.n_volumes) {
        throw Error(run.spec->data_path + ": " + std::to_string(row) + " volumes read; " +
                    std::to_string(run.n_volumes) + " expected");
      }
      const std::vector<double>& sums = stream.GridSums();
      for (int64_t i = 0; i < n_grid; ++i) grid_sum(i) += sums[static_cast<size_t>(i)];
      grid_volumes += row;
    }
    out.runs.push_back(series.Test(fit.valid, model_df));
    out.tested += out.runs.back().tested;
    out.flagged += out.runs.back().flagged;
  }
  if (images) {
    out.mean_image.resize(static_cast<size_t>(grid_sum.size()));
    for (Eigen::Index i = 0; i < grid_sum.size(); ++i) {
      out.mean_image[static_cast<size_t>(i)] =
          static_cast<float>(grid_sum(i) / static_cast<double>(grid_volumes));
    }
  }
  return out;
}

std::string SerializeResidualDiagnostics(const ResidualDiagnostics& d, const std::string& key) {
  std::string out = std::string(kCacheMagic) + "\n" + key + "\n" + std::to_string(d.runs.size()) +
                    " " + std::to_string(d.runs.empty() ? 0 : d.runs.front().q.size()) + " " +
                    std::to_string(d.mean_image.size()) + "\n";
  for (const RunWhiteness& run : d.runs) {
    out += std::to_string(run.tested) + " " + std::to_string(run.flagged) + "\n";
  }
  for (const RunWhiteness& run : d.runs) {
    AppendArray(&out, run.q);
    AppendArray(&out, run.p);
  }
  AppendArray(&out, d.mean_image);
  return out;
}

bool ParseResidualDiagnostics(const std::string& bytes, const std::string& key,
                              ResidualDiagnostics* out) {
  std::istringstream in(bytes);
  std::string magic, stored_key;
  if (!std::getline(in, magic) || magic != kCacheMagic) return false;
  if (!std::getline(in, stored_key) || stored_key != key) return false;
  size_t runs = 0, units = 0, grid = 0;
  if (!(in >> runs >> units >> grid) || runs > 100000) return false;
  ResidualDiagnostics d;
  d.runs.resize(runs);
  for (RunWhiteness& run : d.runs) {
    if (!(in >> run.tested >> run.flagged)) return false;
    d.tested += run.tested;
    d.flagged += run.flagged;
  }
  if (in.get() != '\n') return false;
  for (RunWhiteness& run : d.runs) {
    if (!ReadArray(in, units, &run.q) || !ReadArray(in, units, &run.p)) return false;
  }
  if (!ReadArray(in, grid, &d.mean_image)) return false;
  if (in.peek() != std::char_traits<char>::eof()) return false;
  *out = std::move(d);
  return true;
}

}  // namespace boldsum
