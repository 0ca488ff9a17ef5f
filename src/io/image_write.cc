#include <nifti2_io.h>
#include <sys/stat.h>

#include <algorithm>
#include <cerrno>
#include <cstring>
#include <cstdio>
#include <memory>
#include <mutex>

#include "boldsum/io.h"
#include "io/atomic_file.h"
#include "io/nifti_header.h"

namespace boldsum {
namespace {

bool EndsWith(const std::string& text, const std::string& end) {
  return text.size() >= end.size() && text.compare(text.size() - end.size(), end.size(), end) == 0;
}

struct NimDeleter {
  void operator()(nifti_image* nim) const {
    nim->data = nullptr;  // the values belong to the caller
    nifti_image_free(nim);
  }
};

// A NIfTI-1 float32 image description on `geometry`'s grid, named `file`.
std::unique_ptr<nifti_image, NimDeleter> MakeImage(const std::string& path,
                                                   const std::string& file,
                                                   const ImageGeometry& g, int n_volumes) {
  const int64_t dims[8] = {n_volumes > 1 ? 4 : 3, g.dims[0], g.dims[1], g.dims[2],
                           n_volumes, 1, 1, 1};
  std::unique_ptr<nifti_image, NimDeleter> nim(nifti_make_new_nim(dims, DT_FLOAT32, 0));
  if (!nim) throw Error(path + ": cannot set up the NIfTI header");
  nim->dx = nim->pixdim[1] = g.voxel_mm[0];
  nim->dy = nim->pixdim[2] = g.voxel_mm[1];
  nim->dz = nim->pixdim[3] = g.voxel_mm[2];
  nim->dt = nim->pixdim[4] = n_volumes > 1 ? g.tr_s : 0.0;
  nim->xyz_units = NIFTI_UNITS_MM;
  nim->time_units = NIFTI_UNITS_SEC;
  nim->scl_slope = 1.0;
  nim->scl_inter = 0.0;
  nim->qform_code = g.qform_code;
  nim->quatern_b = g.quatern_b;
  nim->quatern_c = g.quatern_c;
  nim->quatern_d = g.quatern_d;
  nim->qoffset_x = g.qoffset_x;
  nim->qoffset_y = g.qoffset_y;
  nim->qoffset_z = g.qoffset_z;
  nim->qfac = nim->pixdim[0] = g.qfac < 0 ? -1.0 : 1.0;
  nim->sform_code = g.sform_code;
  for (int r = 0; r < 3; ++r) {
    for (int c = 0; c < 4; ++c) nim->sto_xyz.m[r][c] = g.srow[r][c];
  }
  nim->sto_xyz.m[3][0] = nim->sto_xyz.m[3][1] = nim->sto_xyz.m[3][2] = 0.0;
  nim->sto_xyz.m[3][3] = 1.0;
  std::snprintf(nim->descrip, sizeof nim->descrip, "boldsum %s", BOLDSUM_VERSION);
  nim->nifti_type = NIFTI_FTYPE_NIFTI1_1;  // nifticlib 3.0.1 cannot write NIfTI-2
  if (nifti_set_filenames(nim.get(), file.c_str(), 0, 1) != 0) {
    throw Error(path + ": nifticlib does not accept the file name " + file);
  }
  nim->nifti_type = NIFTI_FTYPE_NIFTI1_1;
  return nim;
}

void WriteToTemporary(const std::string& path, const std::string& file, bool gzip,
                      const ImageGeometry& geometry, const std::vector<float>& values,
                      int n_volumes) {
  // Header (and the empty extension block) first, through nifticlib; the file is left
  // open so that the values can be written, and each write checked, here.
  znzFile out;
  {
    std::lock_guard<std::mutex> lock(NifticlibMutex());
    auto nim = MakeImage(path, file, geometry, n_volumes);
    out = nifti_image_write_hdr_img2(nim.get(), 2, gzip ? "wb1" : "wb", nullptr, nullptr);
  }
  if (znz_isnull(out)) throw Error(path + ": cannot write the NIfTI header to " + file);
  const size_t total = values.size() * sizeof(float);
  errno = 0;
  const char* bytes = reinterpret_cast<const char*>(values.data());
  size_t written = 0;
  while (written < total) {
    const size_t chunk = std::min<size_t>(total - written, size_t{1} << 26);
    const size_t n = znzwrite(bytes + written, 1, chunk, out);
    if (n != chunk) break;
    written += n;
  }
  int saved_errno = written < total ? errno : 0;
  const int closed = znzclose(out);
  if (saved_errno == 0 && closed != 0) saved_errno = errno;
  if (written < total || closed != 0) {
    throw Error(path + ": write error (" +
                (saved_errno != 0 ? std::strerror(saved_errno) : "unknown reason") + ")");
  }
}

// Reads the header of the written file back and checks it against what was meant.
void Verify(const std::string& path, const std::string& file, bool gzip,
            const ImageGeometry& geometry, int n_volumes) {
  NiftiLayout layout;
  try {
    layout = ReadNiftiLayout(file);
  } catch (const Error& e) {
    throw Error(path + ": the written file does not read back (" + e.what() + ")");
  }
  const ImageGeometry& g = layout.geometry;
  if (g.nifti_version != 1 || layout.type != VoxelType::kFloat32 || g.dims != geometry.dims ||
      g.n_volumes != n_volumes || layout.slope != 1.0 || layout.inter != 0.0) {
    throw Error(path + ": the header read back from " + file + " differs from the one written");
  }
  if (!gzip) {
    struct stat info;
    const int64_t expected = layout.data_offset + layout.VolumeBytes() * n_volumes;
    if (::stat(file.c_str(), &info) != 0 || info.st_size != expected) {
      throw Error(path + ": " + file + " has the wrong length after writing");
    }
  }
}

}  // namespace

void WriteImage(const std::string& path, const ImageGeometry& geometry,
                const std::vector<float>& values, int n_volumes) {
  const bool gzip = EndsWith(path, ".nii.gz");
  if (!gzip && !EndsWith(path, ".nii")) {
    throw Error(path + ": an output image name must end in .nii or .nii.gz");
  }
  if (n_volumes < 1) {
    throw Error(path + ": n_volumes = " + std::to_string(n_volumes) + " (must be at least 1)");
  }
  for (int d : geometry.dims) {
    if (d < 1) throw Error(path + ": image dimensions must be at least 1");
  }
  const int64_t expected = geometry.n_voxels() * n_volumes;
  if (static_cast<int64_t>(values.size()) != expected) {
    throw Error(path + ": " + std::to_string(values.size()) + " values given for " +
                std::to_string(n_volumes) + " volume(s) of " +
                std::to_string(geometry.n_voxels()) + " voxels");
  }
  TempFile temp(path, gzip ? ".nii.gz" : ".nii");
  temp.CloseDescriptor();  // nifticlib opens the file by name
  WriteToTemporary(path, temp.name(), gzip, geometry, values, n_volumes);
  Verify(path, temp.name(), gzip, geometry, n_volumes);
  temp.Commit();
}

}  // namespace boldsum
