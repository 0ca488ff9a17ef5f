// Exposes ModifiedZScores and Median of boldsum_stats to
// tests/reference/test_outlier_scores.py. Reads one sample per line from stdin
// (numbers separated by spaces; "nan" allowed) and prints
//   median <m>
//   scores <M_1> ... <M_n>
// with 17 significant digits (nan where the score is NaN).
#include <cstdio>
#include <iostream>
#include <sstream>
#include <string>
#include <vector>

#include "stats/robust_scores.h"

int main() {
  std::string line;
  while (std::getline(std::cin, line)) {
    std::istringstream in(line);
    std::vector<double> values;
    for (std::string cell; in >> cell;) values.push_back(std::stod(cell));
    std::printf("median %.17g\nscores", boldsum::Median(values));
    for (double score : boldsum::ModifiedZScores(values)) std::printf(" %.17g", score);
    std::printf("\n");
  }
  return 0;
}
