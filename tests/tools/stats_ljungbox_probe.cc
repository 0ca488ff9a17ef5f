// Exposes the residual-whiteness statistics of boldsum_stats to
// tests/reference/test_ljung_box.py. Reads one series per line from stdin:
//   <lags> <model_df> <block> <x_0> <x_1> ... <x_{n-1}>
// and prints three lines with 17 significant digits:
//   acf <r_1> ... <r_lags>        SampleAutocorrelations
//   stream <r_1> ... <r_lags>     AutocorrelationAccumulator fed in blocks of <block> rows
//   lb <Q> <dof> <p>              LjungBox of the acf line
// A malformed line prints "error: <reason>" and makes the exit status 1.
#include <Eigen/Dense>
#include <cstdio>
#include <iostream>
#include <sstream>
#include <string>
#include <vector>

#include "boldsum/error.h"
#include "stats/ljung_box.h"

namespace {

void PrintRow(const char* name, const std::vector<double>& values) {
  std::printf("%s", name);
  for (double v : values) std::printf(" %.17g", v);
  std::printf("\n");
}

}  // namespace

int main() {
  int status = 0;
  std::string line;
  while (std::getline(std::cin, line)) {
    std::istringstream in(line);
    int lags = 0, model_df = 0, block = 0;
    std::vector<double> x;
    in >> lags >> model_df >> block;
    for (double v; in >> v;) x.push_back(v);
    try {
      if (block < 1) throw boldsum::Error("block must be at least 1");
      const int n = static_cast<int>(x.size());
      const std::vector<double> acf = boldsum::SampleAutocorrelations(x.data(), n, lags);
      boldsum::AutocorrelationAccumulator accumulator(1, lags);
      for (int start = 0; start < n; start += block) {
        const int rows = std::min(block, n - start);
        accumulator.Add(Eigen::Map<const Eigen::MatrixXd>(x.data() + start, rows, 1));
      }
      const Eigen::MatrixXd streamed = accumulator.Autocorrelations();
      const boldsum::LjungBoxResult lb = boldsum::LjungBox(acf, n, model_df);
      PrintRow("acf", acf);
      PrintRow("stream", std::vector<double>(streamed.data(), streamed.data() + lags));
      std::printf("lb %.17g %d %.17g\n", lb.q, lb.dof, lb.p);
    } catch (const boldsum::Error& error) {
      std::printf("error: %s\n", error.what());
      status = 1;
    }
  }
  return status;
}
