// Exposes boldsum_stats to tests/reference/test_z_transform.py. Reads one query per line
// from stdin and prints one line of results with 17 significant digits:
//   t <t> <dof>           ->  ZFromT  LogUpperTailT
//   f <f> <dof1> <dof2>   ->  ZFromF  LogUpperTailF
//   logbeta <a> <b>       ->  LogBeta(a, b)
//   lognormal <z>         ->  LogNormalUpperTail(z)
//   zlog <log_p>          ->  ZFromLogUpperTail(log_p)
//   logibeta <a> <b> <r>  ->  log I_x(a, b) with x = 1 / (1 + r)
// Unknown or malformed lines print "error: <line>" and make the exit status 1.
#include <cmath>
#include <cstdio>
#include <iostream>
#include <sstream>
#include <string>

#include "boldsum/stats.h"
#include "stats/log_beta.h"
#include "stats/normal_tail.h"

namespace {

void Print(double a) { std::printf("%.17g\n", a); }
void Print(double a, double b) { std::printf("%.17g %.17g\n", a, b); }

}  // namespace

int main() {
  int status = 0;
  std::string line;
  while (std::getline(std::cin, line)) {
    std::istringstream in(line);
    std::string what;
    double a = 0, b = 0, c = 0;
    in >> what;
    if (what == "t" && in >> a >> b) {
      Print(boldsum::ZFromT(a, b), boldsum::LogUpperTailT(a, b));
    } else if (what == "f" && in >> a >> b >> c) {
      Print(boldsum::ZFromF(a, b, c), boldsum::LogUpperTailF(a, b, c));
    } else if (what == "logbeta" && in >> a >> b) {
      Print(boldsum::LogBeta(a, b));
    } else if (what == "lognormal" && in >> a) {
      Print(boldsum::LogNormalUpperTail(a));
    } else if (what == "zlog" && in >> a) {
      Print(boldsum::ZFromLogUpperTail(a));
    } else if (what == "logibeta" && in >> a >> b >> c) {
      Print(boldsum::LogRegularizedBeta(a, b, boldsum::BetaArgumentFromRatio(c, std::log(c))));
    } else {
      std::printf("error: %s\n", line.c_str());
      status = 1;
    }
  }
  return status;
}
