#include "events/fft_convolve.h"

#include <fftw3.h>

#include <algorithm>
#include <complex>
#include <mutex>

#include "boldsum/error.h"

namespace boldsum {
namespace {

// FFTW's planner and plan destruction are not thread-safe; execution is.
std::mutex& PlannerMutex() {
  static std::mutex mutex;
  return mutex;
}

// Buffers and the forward/backward plans of one transform length.
class FftPair {
 public:
  explicit FftPair(int length) : length_(length) {
    real_ = fftw_alloc_real(static_cast<size_t>(length));
    spectrum_ = fftw_alloc_complex(static_cast<size_t>(length / 2 + 1));
    if (real_ == nullptr || spectrum_ == nullptr) {
      Release();
      throw Error("out of memory for a convolution of length " + std::to_string(length));
    }
    std::lock_guard<std::mutex> lock(PlannerMutex());
    // FFTW_ESTIMATE: no timing measurements, so the plan (and the rounding) is the same on
    // every run.
    forward_ = fftw_plan_dft_r2c_1d(length, real_, spectrum_, FFTW_ESTIMATE);
    backward_ = fftw_plan_dft_c2r_1d(length, spectrum_, real_, FFTW_ESTIMATE);
  }
  ~FftPair() { Release(); }
  FftPair(const FftPair&) = delete;
  FftPair& operator=(const FftPair&) = delete;

  // Copies `values` into the zero-padded real buffer and transforms it.
  void Forward(const std::vector<double>& values) {
    std::fill(real_, real_ + length_, 0.0);
    std::copy(values.begin(), values.end(), real_);
    fftw_execute(forward_);
  }
  void Backward() { fftw_execute(backward_); }

  int spectrum_size() const { return length_ / 2 + 1; }
  fftw_complex* spectrum() { return spectrum_; }
  const double* real() const { return real_; }

 private:
  void Release() {
    {
      std::lock_guard<std::mutex> lock(PlannerMutex());
      if (forward_ != nullptr) fftw_destroy_plan(forward_);
      if (backward_ != nullptr) fftw_destroy_plan(backward_);
      forward_ = backward_ = nullptr;
    }
    if (real_ != nullptr) fftw_free(real_);
    if (spectrum_ != nullptr) fftw_free(spectrum_);
    real_ = nullptr;
    spectrum_ = nullptr;
  }

  int length_;
  double* real_ = nullptr;
  fftw_complex* spectrum_ = nullptr;
  fftw_plan forward_ = nullptr;
  fftw_plan backward_ = nullptr;
};

}  // namespace

int SmoothFftLength(int n) {
  for (int candidate = std::max(n, 1);; ++candidate) {
    int rest = candidate;
    for (int factor : {2, 3, 5, 7}) {
      while (rest % factor == 0) rest /= factor;
    }
    if (rest == 1) return candidate;
  }
}

std::vector<std::vector<double>> ConvolveCausal(const std::vector<double>& signal,
                                                const std::vector<std::vector<double>>& kernels) {
  const int n = static_cast<int>(signal.size());
  std::vector<std::vector<double>> results(kernels.size());
  if (n == 0 || kernels.empty()) return results;
  size_t longest = 1;
  for (const std::vector<double>& kernel : kernels) longest = std::max(longest, kernel.size());
  const int length = SmoothFftLength(n + static_cast<int>(longest) - 1);

  FftPair fft(length);
  fft.Forward(signal);
  const int bins = fft.spectrum_size();
  std::vector<std::complex<double>> signal_spectrum(static_cast<size_t>(bins));
  for (int b = 0; b < bins; ++b) {
    signal_spectrum[b] = {fft.spectrum()[b][0], fft.spectrum()[b][1]};
  }
  const double unscale = 1.0 / length;  // FFTW's backward transform is unnormalised
  for (size_t k = 0; k < kernels.size(); ++k) {
    fft.Forward(kernels[k]);
    for (int b = 0; b < bins; ++b) {
      const std::complex<double> product =
          std::complex<double>(fft.spectrum()[b][0], fft.spectrum()[b][1]) * signal_spectrum[b] *
          unscale;
      fft.spectrum()[b][0] = product.real();
      fft.spectrum()[b][1] = product.imag();
    }
    fft.Backward();
    results[k].assign(fft.real(), fft.real() + n);
  }
  return results;
}

}  // namespace boldsum
