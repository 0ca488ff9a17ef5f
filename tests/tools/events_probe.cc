// Exposes the events module to tests/reference/test_hrf.py. Output: whitespace-separated
// numbers with 17 significant digits, one line per sample. Usage:
//   events_probe grid TR
//       -> "per_volume dt"
//   events_probe raw SHAPE T...
//       -> per time: "t raw_hrf raw_time_derivative raw_hrf_with_first_scale+0.01"
//   events_probe kernel SHAPE DERIVATIVES DT
//       -> per grid sample i: "t_i main_i time_i dispersion_i" (absent kernels print 0)
//   events_probe regressors SHAPE DERIVATIVES TR SLICE_REF N [ONSET:DURATION:AMPLITUDE]...
//       -> N lines of the convolved columns (main [time [dispersion]])
//   events_probe fir BIN_S BINS TR SLICE_REF N [ONSET:DURATION:AMPLITUDE]...
//       -> N lines of FIR bins
// SHAPE: double_gamma | glover; DERIVATIVES: none | time | time_dispersion.
#include <cstdio>
#include <cstdlib>
#include <iostream>
#include <string>
#include <vector>

#include "boldsum/error.h"
#include "events/event_regressor.h"
#include "events/hrf.h"

namespace {

using boldsum::Error;

boldsum::HrfShape Shape(const std::string& word) {
  if (word == "double_gamma") return boldsum::HrfShape::kDoubleGamma;
  if (word == "glover") return boldsum::HrfShape::kGlover;
  throw Error("unknown shape '" + word + "'");
}

boldsum::HrfDerivatives Derivatives(const std::string& word) {
  if (word == "none") return boldsum::HrfDerivatives::kNone;
  if (word == "time") return boldsum::HrfDerivatives::kTime;
  if (word == "time_dispersion") return boldsum::HrfDerivatives::kTimeDispersion;
  throw Error("unknown derivatives '" + word + "'");
}

double Number(const std::string& text) {
  char* end = nullptr;
  const double value = std::strtod(text.c_str(), &end);
  if (end == text.c_str() || *end != '\0') throw Error("not a number: '" + text + "'");
  return value;
}

std::vector<boldsum::Event> Events(char** first, char** last) {
  std::vector<boldsum::Event> events;
  for (char** arg = first; arg != last; ++arg) {
    const std::string text = *arg;
    const size_t a = text.find(':');
    const size_t b = text.find(':', a + 1);
    if (a == std::string::npos || b == std::string::npos) throw Error("bad event '" + text + "'");
    events.push_back({Number(text.substr(0, a)), Number(text.substr(a + 1, b - a - 1)),
                      Number(text.substr(b + 1))});
  }
  return events;
}

void PrintRow(const std::vector<double>& values) {
  for (size_t i = 0; i < values.size(); ++i) {
    std::printf(i == 0 ? "%.17g" : " %.17g", values[i]);
  }
  std::printf("\n");
}

void PrintMatrix(const Eigen::MatrixXd& m) {
  for (Eigen::Index r = 0; r < m.rows(); ++r) {
    std::vector<double> row(m.cols());
    for (Eigen::Index c = 0; c < m.cols(); ++c) row[c] = m(r, c);
    PrintRow(row);
  }
}

int Run(int argc, char** argv) {
  if (argc < 2) throw Error("usage: events_probe grid|raw|kernel|regressors|fir ...");
  const std::string command = argv[1];
  if (command == "grid" && argc == 3) {
    const boldsum::FineGrid grid = boldsum::ChooseFineGrid(Number(argv[2]), 0.0);
    std::printf("%d %.17g\n", grid.per_volume, grid.dt);
  } else if (command == "raw" && argc >= 3) {
    const boldsum::HrfShape shape = Shape(argv[2]);
    for (int i = 3; i < argc; ++i) {
      const double t = Number(argv[i]);
      PrintRow({t, boldsum::RawHrf(shape, t), boldsum::RawHrfTimeDerivative(shape, t),
                boldsum::RawHrf(shape, t, boldsum::kDispersionStepS)});
    }
  } else if (command == "kernel" && argc == 5) {
    const boldsum::SampledHrf hrf =
        boldsum::SampleHrf(Shape(argv[2]), Derivatives(argv[3]), Number(argv[4]));
    for (size_t i = 0; i < hrf.main.size(); ++i) {
      PrintRow({static_cast<double>(i) * hrf.dt, hrf.main[i], hrf.time.empty() ? 0.0 : hrf.time[i],
                hrf.dispersion.empty() ? 0.0 : hrf.dispersion[i]});
    }
  } else if (command == "regressors" && argc >= 7) {
    boldsum::HrfSpec spec;
    spec.shape = Shape(argv[2]);
    spec.derivatives = Derivatives(argv[3]);
    PrintMatrix(boldsum::ConvolvedRegressors(Events(argv + 7, argv + argc), spec, Number(argv[4]),
                                             Number(argv[5]), std::atoi(argv[6])));
  } else if (command == "fir" && argc >= 7) {
    boldsum::HrfSpec spec;
    spec.shape = boldsum::HrfShape::kFir;
    spec.fir_bin_s = Number(argv[2]);
    spec.fir_bins = std::atoi(argv[3]);
    PrintMatrix(boldsum::FirRegressors(Events(argv + 7, argv + argc), spec, Number(argv[4]),
                                       Number(argv[5]), std::atoi(argv[6])));
  } else {
    throw Error("bad arguments for '" + command + "'");
  }
  return 0;
}

}  // namespace

int main(int argc, char** argv) {
  try {
    return Run(argc, argv);
  } catch (const std::exception& error) {
    std::cerr << "events_probe: " << error.what() << "\n";
    return 2;
  }
}
