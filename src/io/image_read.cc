#include <nifti2_io.h>

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

std::array<double, 3> ImageGeometry::WorldPosition(int64_t x, int64_t y, int64_t z) const {
  const double ijk[3] = {static_cast<double>(x), static_cast<double>(y), static_cast<double>(z)};
  std::array<double, 3> world{};
  if (sform_code > 0) {
    for (int r = 0; r < 3; ++r) {
      world[r] = srow[r][0] * ijk[0] + srow[r][1] * ijk[1] + srow[r][2] * ijk[2] + srow[r][3];
    }
  } else if (qform_code > 0) {
    const nifti_dmat44 m =
        nifti_quatern_to_dmat44(quatern_b, quatern_c, quatern_d, qoffset_x, qoffset_y, qoffset_z,
                                voxel_mm[0], voxel_mm[1], voxel_mm[2], qfac < 0 ? -1.0 : 1.0);
    for (int r = 0; r < 3; ++r) {
      world[r] = m.m[r][0] * ijk[0] + m.m[r][1] * ijk[1] + m.m[r][2] * ijk[2] + m.m[r][3];
    }
  } else {
    for (int r = 0; r < 3; ++r) world[r] = ijk[r] * voxel_mm[r];
  }
  return world;
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
