// fit_probe X.tsv Y.tsv C.tsv [--noise ar1|none] [--threads K] [--block B]
// Exposes FitRun, EstimateContrast and TestContrast to the reference scripts.
// Inputs: whitespace-separated numbers, one matrix row per line, no header. X is N x p,
// Y is N x V, C is q x p. Output, one record per line, values with 17 significant digits:
//   rank r | dof d | kept j... | n_nonfinite k | n_constant k | estimable 0/1
//   rho v... | sigma2 v... | valid v... | beta<j> v... (one line per design column)
//   effect<i> v... | cov<k> v... (column-major q x q) | t v... | zt v... | f v... | zf v...
// (t and zt only when q = 1.)
#include <cstdio>
#include <cstdlib>
#include <fstream>
#include <iostream>
#include <sstream>
#include <string>
#include <vector>

#include "boldsum/error.h"
#include "boldsum/fit.h"

namespace {

Eigen::MatrixXd ReadMatrix(const std::string& path) {
  std::ifstream in(path);
  if (!in) throw boldsum::Error(path + ": cannot open");
  std::vector<std::vector<double>> rows;
  std::string line;
  while (std::getline(in, line)) {
    std::istringstream fields(line);
    std::vector<double> row;
    std::string cell;
    while (fields >> cell) row.push_back(std::strtod(cell.c_str(), nullptr));
    if (!row.empty()) rows.push_back(row);
  }
  if (rows.empty()) throw boldsum::Error(path + ": no rows");
  Eigen::MatrixXd m(rows.size(), rows[0].size());
  for (size_t i = 0; i < rows.size(); ++i) {
    if (rows[i].size() != rows[0].size()) throw boldsum::Error(path + ": ragged rows");
    for (size_t j = 0; j < rows[i].size(); ++j) m(i, j) = rows[i][j];
  }
  return m;
}

void Print(const std::string& key, const Eigen::VectorXd& v) {
  std::printf("%s", key.c_str());
  for (Eigen::Index i = 0; i < v.size(); ++i) std::printf("\t%.17g", v(i));
  std::printf("\n");
}

}  // namespace

int main(int argc, char** argv) {
  try {
    if (argc < 4) {
      std::cerr << "usage: fit_probe X.tsv Y.tsv C.tsv [--noise ar1|none] [--threads K]"
                   " [--block B]\n";
      return 2;
    }
    boldsum::FitOptions options;
    int block = 64;
    for (int i = 4; i + 1 < argc; i += 2) {
      const std::string flag = argv[i];
      const std::string value = argv[i + 1];
      if (flag == "--noise") {
        if (value != "none" && value != "ar1") throw boldsum::Error("--noise: ar1 or none");
        options.noise = value == "none" ? boldsum::NoiseModel::kNone : boldsum::NoiseModel::kAr1;
      } else if (flag == "--threads") {
        options.threads = std::stoi(value);
      } else if (flag == "--block") {
        block = std::stoi(value);
      } else {
        throw boldsum::Error("unknown flag " + flag);
      }
    }
    const Eigen::MatrixXd x = ReadMatrix(argv[1]);
    const Eigen::MatrixXd y = ReadMatrix(argv[2]);
    const Eigen::MatrixXd c = ReadMatrix(argv[3]);
    boldsum::MatrixSource source(y, block);
    const boldsum::RunFit fit = boldsum::FitRun(x, &source, options);
    std::printf("rank\t%d\ndof\t%d\nkept", fit.rank, fit.dof);
    for (int k : fit.kept_columns) std::printf("\t%d", k);
    std::printf("\nn_nonfinite\t%d\nn_constant\t%d\n", fit.n_nonfinite, fit.n_constant);
    Print("rho", fit.rho);
    Print("sigma2", fit.sigma2);
    Eigen::VectorXd valid(fit.valid.size());
    for (size_t v = 0; v < fit.valid.size(); ++v) valid(v) = fit.valid[v];
    Print("valid", valid);
    for (Eigen::Index j = 0; j < fit.beta.rows(); ++j) {
      Print("beta" + std::to_string(j), fit.beta.row(j).transpose());
    }
    const boldsum::ContrastEstimate est = boldsum::EstimateContrast(fit, c, options);
    std::printf("estimable\t%d\n", est.estimable ? 1 : 0);
    if (est.estimable) {
      for (Eigen::Index i = 0; i < est.effect.rows(); ++i) {
        Print("effect" + std::to_string(i), est.effect.row(i).transpose());
      }
      for (Eigen::Index k = 0; k < est.covariance.rows(); ++k) {
        Print("cov" + std::to_string(k), est.covariance.row(k).transpose());
      }
      if (est.q == 1) {
        const boldsum::ContrastTest t = boldsum::TestContrast(est, false, options.threads);
        Print("t", t.stat);
        Print("zt", t.z);
      }
      const boldsum::ContrastTest f = boldsum::TestContrast(est, true, options.threads);
      Print("f", f.stat);
      Print("zf", f.z);
    }
    return 0;
  } catch (const std::exception& e) {
    std::cerr << "fit_probe: " << e.what() << "\n";
    return 1;
  }
}
