#include "events/fft_convolve.h"

#include <gtest/gtest.h>
#include <rapidcheck/gtest.h>

#include <algorithm>
#include <cmath>
#include <random>
#include <thread>

namespace boldsum {
namespace {

// The textbook causal convolution sum, truncated to the signal's length.
std::vector<double> DirectConvolution(const std::vector<double>& signal,
                                      const std::vector<double>& kernel) {
  std::vector<double> out(signal.size(), 0.0);
  for (size_t m = 0; m < signal.size(); ++m) {
    for (size_t i = 0; i < kernel.size() && i <= m; ++i) out[m] += kernel[i] * signal[m - i];
  }
  return out;
}

std::vector<double> RandomVector(std::mt19937_64* rng, size_t n) {
  std::uniform_real_distribution<double> uniform(-1.0, 1.0);
  std::vector<double> v(n);
  for (double& x : v) x = uniform(*rng);
  return v;
}

double MaxAbs(const std::vector<double>& v) {
  double m = 0.0;
  for (double x : v) m = std::max(m, std::abs(x));
  return m;
}

TEST(ConvolveCausal, MatchesDirectSumForManySizes) {
  std::mt19937_64 rng(7);
  for (size_t n : {1u, 2u, 7u, 100u, 321u, 1000u, 40000u}) {
    for (size_t length : {1u, 3u, 321u, 641u}) {
      const std::vector<double> signal = RandomVector(&rng, n);
      const std::vector<double> kernel = RandomVector(&rng, length);
      const std::vector<double> fast = ConvolveCausal(signal, {kernel})[0];
      const std::vector<double> direct = DirectConvolution(signal, kernel);
      ASSERT_EQ(fast.size(), n);
      // FFT rounding: about eps * log2(size) * sqrt(length) for unit-sized inputs; 1e-12 has
      // a wide margin over the ~1e-14 seen.
      double worst = 0.0;
      for (size_t m = 0; m < n; ++m) worst = std::max(worst, std::abs(fast[m] - direct[m]));
      EXPECT_LT(worst, 1e-12) << "n = " << n << ", kernel length = " << length;
    }
  }
}

TEST(ConvolveCausal, NoWrapAroundFromTheEnd) {
  // A spike at the last sample must leave every earlier output at (numerically) zero: a
  // circular convolution would fold the kernel's tail onto the start.
  std::vector<double> signal(1000, 0.0);
  signal.back() = 1.0;
  const std::vector<double> kernel(500, 1.0);
  const std::vector<double> out = ConvolveCausal(signal, {kernel})[0];
  EXPECT_LT(MaxAbs(std::vector<double>(out.begin(), out.end() - 1)), 1e-13);
  EXPECT_NEAR(out.back(), 1.0, 1e-13);
}

TEST(ConvolveCausal, SeveralKernelsAndThreadsGiveIdenticalResults) {
  std::mt19937_64 rng(11);
  const std::vector<double> signal = RandomVector(&rng, 5000);
  const std::vector<std::vector<double>> kernels = {RandomVector(&rng, 321),
                                                    RandomVector(&rng, 100)};
  const auto serial = ConvolveCausal(signal, kernels);
  std::vector<std::vector<std::vector<double>>> parallel(4);
  std::vector<std::thread> threads;
  for (auto& result : parallel) {
    threads.emplace_back(
        [&result, &signal, &kernels] { result = ConvolveCausal(signal, kernels); });
  }
  for (std::thread& thread : threads) thread.join();
  for (const auto& result : parallel) EXPECT_EQ(result, serial);  // bitwise
  // Alone, the short kernel gets a shorter transform: equal to rounding, not bitwise.
  const std::vector<double> alone = ConvolveCausal(signal, {kernels[1]})[0];
  for (size_t m = 0; m < alone.size(); ++m) EXPECT_NEAR(alone[m], serial[1][m], 1e-12);
}

TEST(SmoothFftLength, SmallestSevenSmoothNumberNotBelow) {
  EXPECT_EQ(SmoothFftLength(1), 1);
  EXPECT_EQ(SmoothFftLength(11), 12);
  EXPECT_EQ(SmoothFftLength(13), 14);
  EXPECT_EQ(SmoothFftLength(97), 98);
  EXPECT_EQ(SmoothFftLength(1031), 1050);
}

RC_GTEST_PROP(ConvolveCausal, IsLinearInTheSignal, ()) {
  const int n = *rc::gen::inRange(1, 300);
  const int length = *rc::gen::inRange(1, 80);
  const double scale = *rc::gen::inRange(-1000, 1000) / 100.0;
  std::mt19937_64 rng(static_cast<unsigned>(n * 131 + length));
  const std::vector<double> signal = RandomVector(&rng, static_cast<size_t>(n));
  const std::vector<double> kernel = RandomVector(&rng, static_cast<size_t>(length));
  std::vector<double> scaled = signal;
  for (double& x : scaled) x *= scale;
  const std::vector<double> a = ConvolveCausal(signal, {kernel})[0];
  const std::vector<double> b = ConvolveCausal(scaled, {kernel})[0];
  for (int m = 0; m < n; ++m)
    RC_ASSERT(std::abs(b[m] - scale * a[m]) < 1e-11 * (1 + std::abs(scale)));
}

}  // namespace
}  // namespace boldsum
