// Internal: what is needed to find, decode and scale the voxel values of a NIfTI file,
// parsed from its header through nifticlib.
#pragma once

#include <cstdint>
#include <mutex>
#include <string>

#include "boldsum/io.h"

namespace boldsum {

// NIfTI datatype codes that boldsum reads (NIfTI-1 standard, nifti1.h).
enum class VoxelType { kUint8 = 2, kInt16 = 4, kInt32 = 8, kFloat32 = 16, kFloat64 = 64 };

struct NiftiLayout {
  ImageGeometry geometry;
  std::string data_path;      // the file holding the voxel values (.nii or .img)
  int64_t data_offset = 0;    // byte offset of the first value (vox_offset)
  VoxelType type = VoxelType::kFloat32;
  int bytes_per_value = 4;
  bool swap_bytes = false;    // the file's byte order differs from this machine's
  // value = raw * slope + inter; slope 1, inter 0 when the header's scl_slope is 0 or
  // not finite (NIfTI-1 standard: "if the scl_slope field is zero, then scaling is
  // disabled").
  double slope = 1.0, inter = 0.0;

  int64_t VolumeBytes() const { return geometry.n_voxels() * bytes_per_value; }
};

// Parses the header of `path`. Throws Error("<path>: ...") when the file is missing or
// unreadable, is not NIfTI-1/-2 (including ANALYZE 7.5), has more than 4 dimensions, or
// has a datatype other than uint8, int16, int32, float32, float64.
NiftiLayout ReadNiftiLayout(const std::string& path);

// Held around every nifticlib call: the library keeps global state and does not promise
// to be thread-safe, while boldsum reads and writes images from several threads.
std::mutex& NifticlibMutex();

// Lower-case name of a NIfTI datatype code ("int8", "complex64", ...; "code <n>" when
// the code is not in the standard).
std::string DatatypeName(int code);

}  // namespace boldsum
