// Linear (not circular) convolution of a long series with short kernels, through FFTW.
#pragma once

#include <vector>

namespace boldsum {

// For each kernel k (length L_k >= 1) returns the causal convolution truncated to the
// signal's length n:  out_k[m] = sum_{i=0}^{min(m, L_k - 1)} kernel_k[i] * signal[m - i].
// The transforms are zero-padded to a length >= n + max L_k - 1 (a product of 2, 3, 5 and 7),
// so nothing wraps around. Rounding error is about eps * log2(size) * sum|signal| * max|kernel|;
// exact zeros in the result are not guaranteed. Deterministic and safe to call from several
// threads (FFTW planning is serialised by a mutex; nothing is cached between calls).
std::vector<std::vector<double>> ConvolveCausal(const std::vector<double>& signal,
                                                const std::vector<std::vector<double>>& kernels);

// The smallest n' >= n whose prime factors are all in {2, 3, 5, 7}. REQUIRES: n >= 1.
int SmoothFftLength(int n);

}  // namespace boldsum
