#include "design/drift.h"

#include <algorithm>
#include <cmath>

namespace boldsum {

int CosineDriftCount(int n_volumes, double tr_s, double cutoff_s, bool* capped) {
  const double count = std::floor(2.0 * n_volumes * tr_s / cutoff_s);
  const double cap = std::max(0, n_volumes - 1);
  if (capped != nullptr) *capped = count > cap;
  return static_cast<int>(std::min(count, cap));
}

Eigen::MatrixXd CosineDrift(int n_volumes, int count) {
  Eigen::MatrixXd drift(n_volumes, count);
  const double scale = std::sqrt(2.0 / n_volumes);
  const double pi = std::acos(-1.0);
  for (int j = 1; j <= count; ++j) {
    for (int n = 0; n < n_volumes; ++n) {
      drift(n, j - 1) = scale * std::cos(pi * j * (n + 0.5) / n_volumes);
    }
  }
  return drift;
}

Eigen::MatrixXd LegendreDrift(int n_volumes, int degree) {
  Eigen::MatrixXd drift(n_volumes, degree);
  for (int n = 0; n < n_volumes; ++n) {
    const double x = n_volumes > 1 ? -1.0 + 2.0 * n / (n_volumes - 1) : 0.0;
    double previous = 1.0;  // P_0
    double current = x;     // P_1
    for (int d = 1; d <= degree; ++d) {
      drift(n, d - 1) = current;
      const double next = ((2.0 * d + 1.0) * x * current - d * previous) / (d + 1.0);
      previous = current;
      current = next;
    }
  }
  return drift;
}

}  // namespace boldsum
