// Slow-drift regressors over the volumes of one run.
#pragma once

#include <Eigen/Dense>

namespace boldsum {

// Number of cosine regressors for a run of n_volumes at tr_s with periods longer than
// cutoff_s modelled: floor(2 N TR / cutoff), capped at N - 1 (j = N is identically zero and
// higher j alias lower ones); *capped tells whether the cap applied (may be null).
// REQUIRES: n_volumes >= 1, tr_s > 0, cutoff_s > 0.
int CosineDriftCount(int n_volumes, double tr_s, double cutoff_s, bool* capped = nullptr);

// n_volumes x count: column j-1 (j = 1..count) is sqrt(2/N) cos(pi j (n + 0.5) / N),
// n = 0..N-1 (the orthonormal DCT-II basis without its constant term), so the columns are
// orthonormal and orthogonal to the intercept.
Eigen::MatrixXd CosineDrift(int n_volumes, int count);

// n_volumes x degree: column d-1 (d = 1..degree) is the Legendre polynomial P_d at
// x_n = -1 + 2 n / (N - 1) (x = 0 when N = 1), so values lie in [-1, 1]. Evaluated by
// Bonnet's recurrence (d+1) P_{d+1} = (2d+1) x P_d - d P_{d-1}.
Eigen::MatrixXd LegendreDrift(int n_volumes, int degree);

}  // namespace boldsum
