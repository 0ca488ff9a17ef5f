#include "io/nifti_header.h"

#include "io/byte_source.h"

#include <nifti2_io.h>

#include <cerrno>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <limits>
#include <memory>
#include <mutex>

namespace boldsum {
namespace {

// nifticlib prints its own complaints to stderr; boldsum reports errors itself.
void QuietNifticlib() {
  static std::once_flag once;
  std::call_once(once, [] { nifti_set_debug_level(0); });
}

struct NimDeleter {
  void operator()(nifti_image* nim) const { nifti_image_free(nim); }
};

// Seconds per unit of pixdim[4] for the time bits of xyzt_units (NIfTI-1 standard).
// An unknown or non-time unit is taken as seconds, the usual choice of writers that
// leave the field empty.
double SecondsPerTimeUnit(int time_units) {
  switch (time_units) {
    case NIFTI_UNITS_MSEC: return 1e-3;
    case NIFTI_UNITS_USEC: return 1e-6;
    default: return 1.0;
  }
}

int CheckedInt(const std::string& path, const char* what, int64_t value) {
  if (value < 1 || value > std::numeric_limits<int>::max()) {
    throw Error(path + ": " + what + " = " + std::to_string(value) + " is out of range (1 to " +
                std::to_string(std::numeric_limits<int>::max()) + ")");
  }
  return static_cast<int>(value);
}

// Called when nifticlib cannot read a header: throws the gzip error when the file is a
// damaged gzip stream that starts like a NIfTI header, and "not a NIfTI file" otherwise.
[[noreturn]] void ExplainUnreadableHeader(const std::string& path) {
  ByteSource source(path, 0);
  unsigned char start[4] = {0, 0, 0, 0};
  source.Read(start, sizeof start);
  int32_t size;
  std::memcpy(&size, start, sizeof size);
  const int32_t swapped = static_cast<int32_t>(__builtin_bswap32(static_cast<uint32_t>(size)));
  if (source.IsCompressed() && (size == 348 || size == 540 || swapped == 348 || swapped == 540)) {
    source.CheckToEnd();
  }
  throw Error(path + ": not a NIfTI file");
}

}  // namespace

std::mutex& NifticlibMutex() {
  static std::mutex mutex;
  return mutex;
}

std::string DatatypeName(int code) {
  switch (code) {
    case DT_BINARY: return "binary";
    case DT_UINT8: return "uint8";
    case DT_INT16: return "int16";
    case DT_INT32: return "int32";
    case DT_FLOAT32: return "float32";
    case DT_COMPLEX64: return "complex64";
    case DT_FLOAT64: return "float64";
    case DT_RGB24: return "rgb24";
    case DT_INT8: return "int8";
    case DT_UINT16: return "uint16";
    case DT_UINT32: return "uint32";
    case DT_INT64: return "int64";
    case DT_UINT64: return "uint64";
    case DT_FLOAT128: return "float128";
    case DT_COMPLEX128: return "complex128";
    case DT_COMPLEX256: return "complex256";
    case DT_RGBA32: return "rgba32";
    default: return "code " + std::to_string(code);
  }
}

NiftiLayout ReadNiftiLayout(const std::string& path) {
  QuietNifticlib();
  if (std::FILE* probe = std::fopen(path.c_str(), "rb")) {
    std::fclose(probe);
  } else {
    throw Error(path + ": cannot open (" + std::strerror(errno) + ")");
  }
  std::lock_guard<std::mutex> lock(NifticlibMutex());
  // The image struct does not tell NIfTI-1 from NIfTI-2; the raw header does.
  int version = 0;
  void* raw_header = nifti_read_header(path.c_str(), &version, 1);
  std::free(raw_header);
  if (raw_header == nullptr || (version != 1 && version != 2)) ExplainUnreadableHeader(path);
  std::unique_ptr<nifti_image, NimDeleter> nim(nifti_image_read(path.c_str(), 0));
  if (!nim || nim->nifti_type == NIFTI_FTYPE_ANALYZE || nim->nifti_type == NIFTI_FTYPE_ASCII) {
    throw Error(path + ": not a NIfTI file");
  }

  NiftiLayout layout;
  switch (nim->datatype) {
    case DT_UINT8: layout.type = VoxelType::kUint8; layout.bytes_per_value = 1; break;
    case DT_INT16: layout.type = VoxelType::kInt16; layout.bytes_per_value = 2; break;
    case DT_INT32: layout.type = VoxelType::kInt32; layout.bytes_per_value = 4; break;
    case DT_FLOAT32: layout.type = VoxelType::kFloat32; layout.bytes_per_value = 4; break;
    case DT_FLOAT64: layout.type = VoxelType::kFloat64; layout.bytes_per_value = 8; break;
    default:
      throw Error(path + ": datatype " + DatatypeName(nim->datatype) +
                  " is not supported (expected uint8, int16, int32, float32 or float64)");
  }
  const int64_t ndim = nim->dim[0];
  if (ndim < 1 || ndim > 7) throw Error(path + ": dim[0] = " + std::to_string(ndim) +
                                        " is out of range (1 to 7)");
  for (int d = 5; d <= ndim; ++d) {
    if (nim->dim[d] > 1) {
      throw Error(path + ": has " + std::to_string(ndim) + " dimensions (dim[" +
                  std::to_string(d) + "] = " + std::to_string(nim->dim[d]) +
                  "); expected a 3D or 4D image");
    }
  }

  ImageGeometry& g = layout.geometry;
  g.nifti_version = version;
  g.dims = {CheckedInt(path, "nx", nim->nx), CheckedInt(path, "ny", ndim >= 2 ? nim->ny : 1),
            CheckedInt(path, "nz", ndim >= 3 ? nim->nz : 1)};
  g.n_volumes = ndim >= 4 ? CheckedInt(path, "nt", nim->nt) : 1;
  if (g.n_voxels() > std::numeric_limits<int64_t>::max() / 8 / g.n_volumes) {
    throw Error(path + ": image is too large");
  }
  g.voxel_mm = {std::fabs(nim->dx), std::fabs(nim->dy), std::fabs(nim->dz)};
  // Lengths are in xyz_units; metres and microns are converted to mm (here, in the
  // offsets and in the sform below), an unknown unit is taken as mm.
  const double mm_per_unit = nim->xyz_units == NIFTI_UNITS_METER    ? 1000.0
                             : nim->xyz_units == NIFTI_UNITS_MICRON ? 1e-3
                                                                    : 1.0;
  for (double& size : g.voxel_mm) size *= mm_per_unit;
  const double tr = nim->dt * SecondsPerTimeUnit(nim->time_units);
  g.tr_s = ndim >= 4 && std::isfinite(tr) && tr > 0 ? tr : 0.0;

  g.qform_code = nim->qform_code;
  g.sform_code = nim->sform_code;
  g.quatern_b = nim->quatern_b;
  g.quatern_c = nim->quatern_c;
  g.quatern_d = nim->quatern_d;
  g.qoffset_x = nim->qoffset_x * mm_per_unit;
  g.qoffset_y = nim->qoffset_y * mm_per_unit;
  g.qoffset_z = nim->qoffset_z * mm_per_unit;
  g.qfac = nim->qfac < 0 ? -1.0 : 1.0;
  if (nim->sform_code > 0) {
    for (int r = 0; r < 3; ++r) {
      for (int c = 0; c < 4; ++c) g.srow[r][c] = nim->sto_xyz.m[r][c] * mm_per_unit;
    }
  }

  layout.data_path = nim->iname != nullptr ? nim->iname : path;
  layout.data_offset = nim->iname_offset;
  layout.swap_bytes = nim->byteorder != nifti_short_order() && layout.bytes_per_value > 1;
  if (nim->scl_slope != 0.0 && std::isfinite(nim->scl_slope)) {
    layout.slope = nim->scl_slope;
    layout.inter = std::isfinite(nim->scl_inter) ? nim->scl_inter : 0.0;
  }
  return layout;
}

}  // namespace boldsum
