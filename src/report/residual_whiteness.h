// Residual whiteness after prewhitening: per voxel (or region) and run, the Ljung-Box
// test (Ljung & Box 1978, Biometrika 65:297) of the prewhitened GLS residuals at lags
// 1..kWhitenessLags, and the mean image for the slice pictures. The fit never holds the
// residuals (its single pass ends before beta and rho are known), so this is a second
// streamed pass over each run's data with the saved beta and rho. No drawing here.
#pragma once

#include <string>
#include <vector>

#include "study/fit_record.h"
#include "study/run_plan.h"

namespace boldsum {

inline constexpr int kWhitenessLags = 5;
// A residual series fails when P(chi2 > Q) < kWhitenessAlpha: autocorrelation beyond
// chance at the 5% level (common practice). Under whiteness about 5% of voxels fail.
inline constexpr double kWhitenessAlpha = 0.05;

// Degrees of freedom subtracted from the lags: 1 for the AR(1) coefficient estimated
// per voxel (Ljung & Box's rule for fitted ARMA parameters; statsmodels' model_df),
// 0 when the model has no noise model (ordinary least squares).
int WhitenessModelDf(NoiseModel noise);

struct RunWhiteness {
  std::vector<float> q;  // per fitted voxel or region; NaN where the fit is not valid
  std::vector<float> p;
  int tested = 0;   // voxels with a finite p
  int flagged = 0;  // of which p < kWhitenessAlpha
};

struct ResidualDiagnostics {
  std::vector<RunWhiteness> runs;
  std::vector<float> mean_image;  // images: every grid voxel's mean over all volumes of
                                  // all runs; empty for region tables
  int tested = 0, flagged = 0;    // summed over runs

  double share() const;  // flagged / tested; NaN when nothing was tested
};

// The whitened residual of volume t is w_0 = sqrt(1 - rho^2) e_0, w_t = e_t - rho e_{t-1}
// (Prais & Winsten 1954; the whitening of the fit), e = y - X beta with the saved beta.
// Images are streamed in blocks of volumes. Throws Error when the record does not match
// the plan (runs, design width, voxels) or a run cannot be read.
ResidualDiagnostics MeasureResiduals(const SubjectPlan& plan, const FitRecord& record,
                                     NoiseModel noise);

// The cache file's text and its reading back; `key` ties it to one saved fit (see
// write_report.cc). Parsing returns false (and leaves `out` alone) for another key, an
// older layout or damaged contents.
std::string SerializeResidualDiagnostics(const ResidualDiagnostics& diagnostics,
                                         const std::string& key);
bool ParseResidualDiagnostics(const std::string& bytes, const std::string& key,
                              ResidualDiagnostics* out);

}  // namespace boldsum
