#include <algorithm>
#include <string>

#include "boldsum/error.h"
#include "boldsum/fit.h"

namespace boldsum {

MatrixSource::MatrixSource(const Eigen::MatrixXd& data, int block_volumes)
    : data_(data), block_volumes_(block_volumes) {
  if (block_volumes < 1) {
    throw Error("MatrixSource: block_volumes = " + std::to_string(block_volumes) +
                "; it must be at least 1");
  }
}

int MatrixSource::n_volumes() const { return static_cast<int>(data_.rows()); }

int MatrixSource::n_voxels() const { return static_cast<int>(data_.cols()); }

bool MatrixSource::Next(Eigen::MatrixXf* block) {
  const int rows = std::min(block_volumes_, n_volumes() - next_row_);
  if (rows <= 0) return false;
  *block = data_.middleRows(next_row_, rows).cast<float>();
  next_row_ += rows;
  return true;
}

bool MatrixSource::NextDouble(Eigen::MatrixXd* block) {
  const int rows = std::min(block_volumes_, n_volumes() - next_row_);
  if (rows <= 0) return false;
  *block = data_.middleRows(next_row_, rows);
  next_row_ += rows;
  return true;
}

}  // namespace boldsum
