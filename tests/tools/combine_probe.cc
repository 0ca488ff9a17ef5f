// Exposes CombineFixedEffects to tests/reference/test_fixed_effects.py. Reads from stdin
//   q R V
// then for each of the R runs: its dof; V validity flags (0/1); q lines of V effects;
// q*q lines of V covariance entries (row k of the (q*q) x V matrix, column-major per
// voxel). Prints the combined dof, the V flags, q effect lines and q*q covariance lines,
// numbers with 17 significant digits ("nan" where not valid). Exit status 1 and the
// message on stderr when CombineFixedEffects throws or the input is malformed.
#include <cstdio>
#include <iostream>
#include <vector>

#include "boldsum/combine.h"
#include "boldsum/error.h"

namespace {

bool ReadMatrix(Eigen::MatrixXd* m, int rows, int cols) {
  m->resize(rows, cols);
  for (int i = 0; i < rows; ++i) {
    for (int j = 0; j < cols; ++j) {
      if (!(std::cin >> (*m)(i, j))) return false;
    }
  }
  return true;
}

void PrintRow(const Eigen::MatrixXd& m, int row) {
  for (Eigen::Index j = 0; j < m.cols(); ++j) {
    std::printf(j ? " %.17g" : "%.17g", m(row, j));
  }
  std::printf("\n");
}

}  // namespace

int main() {
  int q = 0, n_runs = 0, voxels = 0;
  if (!(std::cin >> q >> n_runs >> voxels) || q < 1 || n_runs < 0 || voxels < 0) {
    std::fprintf(stderr, "combine_probe: bad header (expected q R V)\n");
    return 1;
  }
  std::vector<boldsum::ContrastEstimate> runs(static_cast<std::size_t>(n_runs));
  for (boldsum::ContrastEstimate& run : runs) {
    run.q = q;
    run.valid.resize(static_cast<std::size_t>(voxels));
    bool ok = static_cast<bool>(std::cin >> run.dof);
    for (unsigned char& flag : run.valid) {
      int value = 0;
      ok = ok && static_cast<bool>(std::cin >> value);
      flag = static_cast<unsigned char>(value != 0);
    }
    ok = ok && ReadMatrix(&run.effect, q, voxels) && ReadMatrix(&run.covariance, q * q, voxels);
    if (!ok) {
      std::fprintf(stderr, "combine_probe: truncated or malformed run\n");
      return 1;
    }
  }
  std::vector<const boldsum::ContrastEstimate*> pointers;
  for (const boldsum::ContrastEstimate& run : runs) pointers.push_back(&run);
  try {
    const boldsum::ContrastEstimate out = boldsum::CombineFixedEffects(pointers);
    std::printf("%.17g\n", out.dof);
    for (std::size_t v = 0; v < out.valid.size(); ++v) std::printf(v ? " %d" : "%d", out.valid[v]);
    std::printf("\n");
    for (int i = 0; i < q; ++i) PrintRow(out.effect, i);
    for (int k = 0; k < q * q; ++k) PrintRow(out.covariance, k);
  } catch (const boldsum::Error& e) {
    std::fprintf(stderr, "%s\n", e.what());
    return 1;
  }
  return 0;
}
