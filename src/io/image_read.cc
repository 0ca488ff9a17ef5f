#include <cmath>
#include <vector>

#include "boldsum/io.h"
#include "io/byte_source.h"
#include "io/nifti_header.h"
#include "io/voxel_convert.h"

namespace boldsum {
namespace {

bool Near(double a, double b, double tolerance) { return std::fabs(a - b) <= tolerance; }

}  // namespace

bool ImageGeometry::SameSpace(const ImageGeometry& other) const {
  constexpr double kMm = 1e-4, kQuaternion = 1e-6;
  if (dims != other.dims) return false;
  for (int i = 0; i < 3; ++i) {
    if (!Near(voxel_mm[i], other.voxel_mm[i], kMm)) return false;
  }
  // Each transform that is set must be set in both and agree; the codes' meanings
  // (scanner, aligned, ...) are labels and are not compared.
  if ((qform_code > 0) != (other.qform_code > 0)) return false;
  if (qform_code > 0) {
    if (!Near(quatern_b, other.quatern_b, kQuaternion) ||
        !Near(quatern_c, other.quatern_c, kQuaternion) ||
        !Near(quatern_d, other.quatern_d, kQuaternion) ||
        !Near(qoffset_x, other.qoffset_x, kMm) || !Near(qoffset_y, other.qoffset_y, kMm) ||
        !Near(qoffset_z, other.qoffset_z, kMm) || (qfac < 0) != (other.qfac < 0)) {
      return false;
    }
  }
  if ((sform_code > 0) != (other.sform_code > 0)) return false;
  if (sform_code > 0) {
    for (int r = 0; r < 3; ++r) {
      for (int c = 0; c < 4; ++c) {
        if (!Near(srow[r][c], other.srow[r][c], kMm)) return false;
      }
    }
  }
  return true;
}

ImageGeometry ReadImageGeometry(const std::string& path) {
  return ReadNiftiLayout(path).geometry;
}

std::vector<float> ReadVolume(const std::string& path, ImageGeometry* geometry) {
  const NiftiLayout layout = ReadNiftiLayout(path);
  const ImageGeometry& g = layout.geometry;
  ByteSource source(layout.data_path, layout.data_offset);
  std::vector<unsigned char> raw(static_cast<size_t>(layout.VolumeBytes()));
  if (source.Read(raw.data(), raw.size()) < raw.size()) {
    throw Error(path + ": file ends after volume 0 of " + std::to_string(g.n_volumes));
  }
  if (g.n_volumes == 1) source.CheckToEnd();
  std::vector<float> values(static_cast<size_t>(g.n_voxels()));
  ConvertValues(layout, raw.data(), g.n_voxels(), values.data());
  if (geometry != nullptr) *geometry = g;
  return values;
}

}  // namespace boldsum
