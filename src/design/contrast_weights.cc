// ContrastWeights (declared in boldsum/design.h).
#include <string>

#include "boldsum/design.h"

namespace boldsum {

Eigen::MatrixXd ContrastWeights(const ContrastSpec& contrast, const DesignMatrix& design) {
  const int rows = static_cast<int>(contrast.rows.size());
  Eigen::MatrixXd weights = Eigen::MatrixXd::Zero(rows, design.n_columns());
  for (int r = 0; r < rows; ++r) {
    for (const auto& [key, weight] : contrast.rows[r]) {
      std::vector<int> bins;
      int main = -1;
      int named = -1;
      for (int c = 0; c < design.n_columns(); ++c) {
        const DesignColumn& column = design.columns[c];
        if (column.condition == key && column.kind == ColumnKind::kFirBin) bins.push_back(c);
        if (column.condition == key && column.kind == ColumnKind::kCondition) main = c;
        if (column.name == key) named = c;
      }
      if (!bins.empty()) {
        // FIR: the condition's weight is spread evenly over its bins.
        for (int c : bins) weights(r, c) += weight / static_cast<double>(bins.size());
      } else if (main >= 0) {
        weights(r, main) += weight;
      } else if (named >= 0) {
        weights(r, named) += weight;
      } else {
        const std::vector<std::string> names = design.names();
        std::string message = "contrast '" + contrast.name + "': '" + key +
                              "' is neither a condition nor a column of this run's design";
        const std::string guess = ClosestMatch(key, names);
        if (!guess.empty()) message += "; did you mean '" + guess + "'?";
        throw Error(contrast.where, message);
      }
    }
  }
  return weights;
}

}  // namespace boldsum
