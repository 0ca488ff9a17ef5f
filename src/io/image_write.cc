#include <libdeflate.h>
#include <nifti2_io.h>
#include <sys/stat.h>
#include <unistd.h>

#include <algorithm>
#include <cerrno>
#include <cstdio>
#include <cstring>
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
std::unique_ptr<nifti_image, NimDeleter> MakeImage(const std::string& path, const std::string& file,
                                                   const ImageGeometry& g, int n_volumes) {
  const int64_t dims[8] = {
      n_volumes > 1 ? 4 : 3, g.dims[0], g.dims[1], g.dims[2], n_volumes, 1, 1, 1};
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

// Images up to this many bytes (header and values) are compressed in one piece by
// libdeflate (a single gzip member, about twice as fast as zlib at the same level);
// larger ones (4D stacks) stream through nifticlib and zlib, so that memory stays flat.
constexpr size_t kWholeBufferBytes = size_t{64} << 20;
// gzip level 1, as before: on 91 x 109 x 91 float32 maps (75% NaN) libdeflate's level 1
// takes 9 ms and gives the same size as zlib's level 1 (23 ms) and level 6 (30 ms).
constexpr int kGzipLevel = 1;

// The 352 bytes nifticlib would write before the values: the NIfTI-1 header and an
// empty extension flag.
std::string HeaderBytes(const std::string& path, const std::string& file,
                        const ImageGeometry& geometry, int n_volumes) {
  nifti_1_header header;
  {
    std::lock_guard<std::mutex> lock(NifticlibMutex());
    auto nim = MakeImage(path, file, geometry, n_volumes);
    if (nifti_convert_nim2n1hdr(nim.get(), &header) != 0) {
      throw Error(path + ": cannot set up the NIfTI header");
    }
  }
  header.vox_offset = 352;
  std::string bytes(reinterpret_cast<const char*>(&header), sizeof header);
  bytes.append(4, '\0');
  return bytes;
}

void WriteAll(int fd, const void* data, size_t size, const std::string& path) {
  const char* bytes = static_cast<const char*>(data);
  while (size > 0) {
    const ssize_t n = ::write(fd, bytes, size);
    if (n < 0) {
      if (errno == EINTR) continue;
      throw Error(path + ": write error (" + std::strerror(errno) + ")");
    }
    bytes += n;
    size -= static_cast<size_t>(n);
  }
}

// Header and values in one buffer, gzip-compressed by libdeflate when `gzip`.
void WriteWhole(const std::string& path, int fd, bool gzip, const ImageGeometry& geometry,
                const std::vector<float>& values, int n_volumes, const std::string& file) {
  std::string bytes = HeaderBytes(path, file, geometry, n_volumes);
  const size_t header_size = bytes.size();
  bytes.resize(header_size + values.size() * sizeof(float));
  std::memcpy(&bytes[header_size], values.data(), values.size() * sizeof(float));
  if (!gzip) {
    WriteAll(fd, bytes.data(), bytes.size(), path);
    return;
  }
  std::unique_ptr<libdeflate_compressor, void (*)(libdeflate_compressor*)> compressor(
      libdeflate_alloc_compressor(kGzipLevel), libdeflate_free_compressor);
  if (!compressor) throw Error(path + ": out of memory for the gzip compressor");
  // Not value-initialised: only the compressed bytes are touched.
  const size_t bound = libdeflate_gzip_compress_bound(compressor.get(), bytes.size());
  const std::unique_ptr<unsigned char[]> out(new unsigned char[bound]);
  const size_t size =
      libdeflate_gzip_compress(compressor.get(), bytes.data(), bytes.size(), out.get(), bound);
  if (size == 0) throw Error(path + ": gzip compression failed");
  WriteAll(fd, out.get(), size, path);
}

void WriteThroughNifticlib(const std::string& path, const std::string& file, bool gzip,
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
                std::to_string(n_volumes) + " volume(s) of " + std::to_string(geometry.n_voxels()) +
                " voxels");
  }
  TempFile temp(path, gzip ? ".nii.gz" : ".nii");
  if (352 + values.size() * sizeof(float) <= kWholeBufferBytes) {
    WriteWhole(path, temp.fd(), gzip, geometry, values, n_volumes, temp.name());
    temp.CloseDescriptor();
  } else {
    temp.CloseDescriptor();  // nifticlib opens the file by name
    WriteThroughNifticlib(path, temp.name(), gzip, geometry, values, n_volumes);
  }
  Verify(path, temp.name(), gzip, geometry, n_volumes);
  temp.Commit();
}

}  // namespace boldsum
