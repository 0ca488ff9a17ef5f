#include "events/event_regressor.h"

#include <gtest/gtest.h>
#include <rapidcheck/gtest.h>

#include <cmath>
#include <numeric>

#include "boldsum/error.h"
#include "events/hrf.h"

namespace boldsum {
namespace {

HrfSpec Spec(HrfShape shape, HrfDerivatives derivatives = HrfDerivatives::kNone) {
  HrfSpec spec;
  spec.shape = shape;
  spec.derivatives = derivatives;
  return spec;
}

TEST(ChooseFineGrid, SpacingAtMostTrOver16AndAtMost50Ms) {
  // The contract's bound is dt <= TR / 16 and dt <= 0.1 s with t_k on the grid; boldsum
  // takes max(16, ceil(TR / 0.05 s)) points per TR.
  const struct {
    double tr;
    int per_volume;
  } cases[] = {{2.0, 40}, {0.8, 16}, {2.5, 50}, {0.72, 16}, {3.0, 60},
               {1.6, 32}, {1.7, 34}, {0.5, 16}, {0.81, 17}};
  for (const auto& c : cases) {
    const FineGrid grid = ChooseFineGrid(c.tr, 0.5);
    EXPECT_EQ(grid.per_volume, c.per_volume) << "TR = " << c.tr;
    EXPECT_LE(grid.dt, 0.05 * (1 + 1e-15));
    EXPECT_LE(grid.dt, c.tr / 16);
  }
  EXPECT_THROW(ChooseFineGrid(0.0, 0.5), Error);
  EXPECT_THROW(ChooseFineGrid(-2.0, 0.5), Error);
}

TEST(EventWeightsOnGrid, KeepsAreaAndCentroidExactly) {
  const FineGrid grid = ChooseFineGrid(2.0, 0.5);
  const std::vector<Event> events = {{12.34, 3.21, 0.7}};
  const std::vector<double> w = EventWeightsOnGrid(events, grid, -10, 500);
  double area = 0.0, moment = 0.0;
  for (size_t i = 0; i < w.size(); ++i) {
    const double g = grid.slice_reference * grid.tr_s + (static_cast<double>(i) - 10) * grid.dt;
    area += w[i] * grid.dt;
    moment += w[i] * grid.dt * g;
  }
  // A boxcar of height A on [a, a + d] has area A d and first moment A d (a + d / 2).
  EXPECT_NEAR(area, 0.7 * 3.21, 1e-13);
  EXPECT_NEAR(moment, 0.7 * 3.21 * (12.34 + 3.21 / 2), 1e-11);
}

TEST(EventWeightsOnGrid, ImpulseOnAGridPointFallsOnThatPoint) {
  const FineGrid grid = ChooseFineGrid(2.0, 0.0);
  const std::vector<double> w = EventWeightsOnGrid({{5 * grid.dt, 0.0, 2.0}}, grid, 0, 20);
  for (int j = 0; j <= 20; ++j) EXPECT_NEAR(w[j], j == 5 ? 2.0 / grid.dt : 0.0, 1e-12);
}

TEST(EventWeightsOnGrid, RejectsNegativeDurationAndNonFiniteValues) {
  const FineGrid grid = ChooseFineGrid(2.0, 0.0);
  EXPECT_THROW(EventWeightsOnGrid({{1.0, -1.0, 1.0}}, grid, 0, 10), Error);
  EXPECT_THROW(EventWeightsOnGrid({{std::nan(""), 1.0, 1.0}}, grid, 0, 10), Error);
  EXPECT_THROW(EventWeightsOnGrid({{1.0, 1.0, INFINITY}}, grid, 0, 10), Error);
}

TEST(ConvolvedRegressors, ZeroDurationEventIsTheSampledHrf) {
  // Onset on grid point 3 (t = 0.5 TR + 3 dt): volume k shows kernel sample kM - 3, / dt.
  const double tr = 2.0;
  const FineGrid grid = ChooseFineGrid(tr, 0.5);
  const SampledHrf hrf = SampleHrf(HrfShape::kDoubleGamma, HrfDerivatives::kNone, grid.dt);
  const Eigen::MatrixXd x = ConvolvedRegressors({{1.0 + 3 * grid.dt, 0.0, 1.0}},
                                                Spec(HrfShape::kDoubleGamma), tr, 0.5, 30);
  for (int k = 0; k < 30; ++k) {
    const int i = k * grid.per_volume - 3;
    const double expected =
        (i >= 0 && i < static_cast<int>(hrf.main.size())) ? hrf.main[i] / grid.dt : 0.0;
    EXPECT_NEAR(x(k, 0), expected, 1e-14) << "volume " << k;
  }
}

TEST(ConvolvedRegressors, SustainedBlockPlateausAtOne) {
  for (HrfShape shape : {HrfShape::kDoubleGamma, HrfShape::kGlover}) {
    for (double tr : {0.8, 2.0, 2.5}) {
      const int n = static_cast<int>(200 / tr);
      const Eigen::MatrixXd x = ConvolvedRegressors({{3.3, 150.0, 1.0}}, Spec(shape), tr, 0.5, n);
      for (int k = 0; k < n; ++k) {
        const double t = (k + 0.5) * tr;
        // Fully inside: more than 32 s (the kernel's support) after onset, before the end.
        if (t > 3.3 + 32.0 + tr && t < 153.3) {
          EXPECT_NEAR(x(k, 0), 1.0, 1e-12) << t;
        }
      }
    }
  }
}

// Textbook convolution sum evaluated only at the volumes, against the FFT path.
TEST(ConvolvedRegressors, MatchesDirectConvolutionOnLongRunsAndAtTheEnd) {
  const double tr = 2.0, slice_reference = 0.3;
  const int n = 2000;
  const double end = (n - 1 + slice_reference) * tr;
  std::vector<Event> events;
  for (int e = 0; e < 300; ++e)
    events.push_back({-20.0 + e * 13.37, 0.1 * (e % 7), 1.0 + 0.01 * e});
  for (double onset : {end - 40.0, end - 0.05, end, end + 0.01})
    events.push_back({onset, 2.0, 1.0});
  events.push_back({end - 0.3, 0.0, 1.0});
  const HrfSpec spec = Spec(HrfShape::kGlover, HrfDerivatives::kTimeDispersion);
  const Eigen::MatrixXd x = ConvolvedRegressors(events, spec, tr, slice_reference, n);

  const FineGrid grid = ChooseFineGrid(tr, slice_reference);
  const SampledHrf hrf = SampleHrf(spec.shape, spec.derivatives, grid.dt);
  const int first = -static_cast<int>(hrf.main.size());
  const std::vector<double> w = EventWeightsOnGrid(events, grid, first, (n - 1) * grid.per_volume);
  const std::vector<double>* kernels[] = {&hrf.main, &hrf.time, &hrf.dispersion};
  for (int c = 0; c < 3; ++c) {
    for (int k = 0; k < n; ++k) {
      double direct = 0.0;
      const int m = k * grid.per_volume - first;
      for (int i = 0; i < static_cast<int>(kernels[c]->size()) && i <= m; ++i) {
        direct += (*kernels[c])[i] * w[m - i];
      }
      // FFT rounding on a 40k-point transform of O(1) values: ~1e-14 seen; 1e-11 margin.
      ASSERT_NEAR(x(k, c), direct, 1e-11) << "column " << c << ", volume " << k;
    }
  }
  EXPECT_GT(std::abs(x(n - 1, 0)), 1e-3);  // the events near the end do show
}

TEST(ConvolvedRegressors, ExactZerosWhereNoEventReaches) {
  // t_k = (k + 0.5) 2: volumes 0..9 lie before the onset at 20 s; from k = 26 (t = 53 s,
  // lag 33 s > 32 s plus a grid step) the kernel has ended.
  const Eigen::MatrixXd x = ConvolvedRegressors(
      {{20.0, 0.0, 1.0}}, Spec(HrfShape::kDoubleGamma, HrfDerivatives::kTimeDispersion), 2.0, 0.5,
      40);
  for (int k = 0; k < 40; ++k) {
    if (k <= 9 || k >= 26) {
      EXPECT_EQ(x.row(k).cwiseAbs().maxCoeff(), 0.0) << k;
    } else {
      EXPECT_NE(x(k, 0), 0.0) << k;
    }
  }
}

TEST(ConvolvedRegressors, NoEventsGiveExactZeros) {
  const Eigen::MatrixXd x =
      ConvolvedRegressors({}, Spec(HrfShape::kDoubleGamma, HrfDerivatives::kTime), 2.0, 0.5, 50);
  EXPECT_EQ(x.cols(), 2);
  EXPECT_EQ(x.cwiseAbs().maxCoeff(), 0.0);
  EXPECT_THROW(ConvolvedRegressors({}, Spec(HrfShape::kFir), 2.0, 0.5, 50), Error);
}

TEST(FirRegressors, BinsCountLagsAfterOnset) {
  HrfSpec spec = Spec(HrfShape::kFir);
  spec.fir_bin_s = 3.0;
  spec.fir_bins = 3;
  // TR 2, slice_reference 0: t_k = 2k. Onset 4 (amplitude 2): lags 0,2,4,6,8 at k = 2..6,
  // bins [0,3) [3,6) [6,9) -> k=2: bin1, k=3: bin1, k=4: bin2, k=5: bin3, k=6: bin3.
  const Eigen::MatrixXd x = FirRegressors({{4.0, 99.0, 2.0}}, spec, 2.0, 0.0, 9);
  Eigen::MatrixXd expected = Eigen::MatrixXd::Zero(9, 3);
  expected(2, 0) = expected(3, 0) = expected(4, 1) = expected(5, 2) = expected(6, 2) = 2.0;
  EXPECT_EQ(x, expected);
}

TEST(FirRegressors, DefaultsCover24SecondsInTrBins) {
  const HrfSpec spec = Spec(HrfShape::kFir);
  EXPECT_EQ(FirBinWidth(spec, 2.5), 2.5);
  EXPECT_EQ(FirBinCount(spec, 2.5), 10);  // ceil(24 / 2.5)
  EXPECT_EQ(FirBinCount(spec, 2.0), 12);
  EXPECT_EQ(FirRegressors({}, spec, 2.0, 0.5, 10).cols(), 12);
}

RC_GTEST_PROP(ConvolvedRegressors, ShiftingOnsetsByOneTrShiftsOneRow, ()) {
  const double tr = *rc::gen::inRange(500, 3000) / 1000.0;
  const double slice_reference = *rc::gen::inRange(0, 1000) / 1000.0;
  const double onset = *rc::gen::inRange(0, 40000) / 1000.0;
  const double duration = *rc::gen::element(0.0, 0.5, 3.0, 17.5);
  const int n = 60;
  const HrfSpec spec = Spec(*rc::gen::element(HrfShape::kDoubleGamma, HrfShape::kGlover),
                            HrfDerivatives::kTimeDispersion);
  const Eigen::MatrixXd a =
      ConvolvedRegressors({{onset, duration, 1.0}}, spec, tr, slice_reference, n);
  const Eigen::MatrixXd b =
      ConvolvedRegressors({{onset + tr, duration, 1.0}}, spec, tr, slice_reference, n);
  // Rounding of the grid coordinate moves mass by ~1e-13 of a cell; FFT noise ~1e-15.
  RC_ASSERT((b.bottomRows(n - 1) - a.topRows(n - 1)).cwiseAbs().maxCoeff() < 1e-9);
  RC_ASSERT(b.row(0).cwiseAbs().maxCoeff() < 1e-12 || onset < 32.0);
}

RC_GTEST_PROP(ConvolvedRegressors, ScalingAmplitudesScalesTheColumns, ()) {
  const double scale = *rc::gen::inRange(-5000, 5000) / 1000.0;
  const double onset = *rc::gen::inRange(0, 60000) / 1000.0;
  const HrfSpec spec = Spec(HrfShape::kDoubleGamma, HrfDerivatives::kTimeDispersion);
  const std::vector<Event> one = {{onset, 2.0, 1.0}, {onset + 20.0, 0.0, 0.5}};
  const std::vector<Event> scaled = {{onset, 2.0, scale}, {onset + 20.0, 0.0, 0.5 * scale}};
  const Eigen::MatrixXd a = ConvolvedRegressors(one, spec, 2.0, 0.5, 60);
  const Eigen::MatrixXd b = ConvolvedRegressors(scaled, spec, 2.0, 0.5, 60);
  RC_ASSERT((b - scale * a).cwiseAbs().maxCoeff() < 1e-12 * (1.0 + std::abs(scale)));
}

}  // namespace
}  // namespace boldsum
