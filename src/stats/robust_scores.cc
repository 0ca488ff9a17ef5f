#include "stats/robust_scores.h"

#include <algorithm>
#include <cmath>
#include <limits>

namespace boldsum {
namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
constexpr double kNormalQuartile = 0.6744897501960817;  // Phi^-1(0.75)

}  // namespace

double Median(std::vector<double> values) {
  values.erase(
      std::remove_if(values.begin(), values.end(), [](double v) { return !std::isfinite(v); }),
      values.end());
  if (values.empty()) return kNaN;
  std::sort(values.begin(), values.end());
  const size_t n = values.size();
  return n % 2 ? values[n / 2] : 0.5 * (values[n / 2 - 1] + values[n / 2]);
}

std::vector<double> ModifiedZScores(const std::vector<double>& values) {
  std::vector<double> scores(values.size(), kNaN);
  const size_t finite = static_cast<size_t>(
      std::count_if(values.begin(), values.end(), [](double v) { return std::isfinite(v); }));
  if (finite < 3) return scores;
  const double median = Median(values);
  std::vector<double> deviations;
  for (double v : values) deviations.push_back(std::isfinite(v) ? std::abs(v - median) : kNaN);
  const double mad = Median(deviations);
  if (!(mad > 0.0)) return scores;
  for (size_t i = 0; i < values.size(); ++i) {
    if (std::isfinite(values[i])) scores[i] = kNormalQuartile * (values[i] - median) / mad;
  }
  return scores;
}

}  // namespace boldsum
