// Test helpers: the error a call throws, a scratch folder, and NIfTI files written byte
// by byte from the header layouts of the NIfTI-1 and NIfTI-2 standards (nifti1.h,
// nifti2.h), independently of boldsum's writer and of nifticlib's.
#pragma once

#include <nifti1.h>
#include <nifti2.h>
#include <stdlib.h>
#include <zlib.h>

#include <algorithm>
#include <cstdint>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <functional>
#include <iterator>
#include <string>
#include <vector>

#include "boldsum/error.h"

namespace boldsum::testing {

// What `body` throws as boldsum::Error (its what()), or "(no error)".
inline std::string ErrorOf(const std::function<void()>& body) {
  try {
    body();
  } catch (const Error& e) {
    return e.what();
  }
  return "(no error)";
}

// A fresh folder under $BOLDSUM_TMP (or /tmp), removed with its contents at the end.
class ScratchDir {
 public:
  ScratchDir() {
    const char* root = std::getenv("BOLDSUM_TMP");
    std::filesystem::path base = root != nullptr ? root : "/tmp";
    std::filesystem::create_directories(base);
    std::string pattern = (base / "io_test_XXXXXX").string();
    path_ = ::mkdtemp(pattern.data()) != nullptr ? pattern : "";
  }
  ~ScratchDir() {
    std::error_code ignored;
    std::filesystem::remove_all(path_, ignored);
  }
  std::string operator/(const std::string& name) const { return path_ + "/" + name; }
  const std::string& path() const { return path_; }
  // The names of the entries in the folder, sorted.
  std::vector<std::string> Entries() const {
    std::vector<std::string> names;
    for (const auto& entry : std::filesystem::directory_iterator(path_)) {
      names.push_back(entry.path().filename().string());
    }
    std::sort(names.begin(), names.end());
    return names;
  }

 private:
  std::string path_;
};

// What goes into a hand-made header; the defaults give a plain 3D float32 image.
struct HeaderSpec {
  int version = 1;                // 1 or 2
  int datatype = DT_FLOAT32;
  int bitpix = 32;
  std::vector<int64_t> dims = {2, 3, 4};  // nx, ny, nz[, nt[, nu]]
  double pixdim[5] = {1, 2.0, 2.5, 3.0, 0.0};  // qfac, dx, dy, dz, dt
  int xyzt_units = NIFTI_UNITS_MM | NIFTI_UNITS_SEC;
  double slope = 0, inter = 0;
  int qform_code = 0, sform_code = 0;
  double quatern[6] = {0, 0, 0, 0, 0, 0};  // b, c, d, x, y, z
  double srow[3][4] = {{1, 0, 0, 0}, {0, 1, 0, 0}, {0, 0, 1, 0}};
  std::vector<char> extension;    // one extension of this content (padded to 16 bytes)
  bool big_endian = false;        // byte-swap the header and the caller's data
};

inline void SwapInPlace(void* p, size_t size) {
  unsigned char* b = static_cast<unsigned char*>(p);
  for (size_t i = 0; i < size / 2; ++i) std::swap(b[i], b[size - 1 - i]);
}

template <typename Header>
void FillCommon(const HeaderSpec& s, int vox_offset, Header* h) {
  h->datatype = static_cast<int16_t>(s.datatype);
  h->bitpix = static_cast<int16_t>(s.bitpix);
  h->dim[0] = static_cast<int>(s.dims.size());
  for (size_t i = 0; i < 7; ++i) h->dim[i + 1] = i < s.dims.size() ? s.dims[i] : 1;
  for (int i = 0; i < 5; ++i) h->pixdim[i] = s.pixdim[i];
  for (int i = 5; i < 8; ++i) h->pixdim[i] = 1;
  h->vox_offset = vox_offset;
  h->scl_slope = s.slope;
  h->scl_inter = s.inter;
  h->xyzt_units = static_cast<char>(s.xyzt_units);
  h->qform_code = static_cast<int16_t>(s.qform_code);
  h->sform_code = static_cast<int16_t>(s.sform_code);
  h->quatern_b = s.quatern[0];
  h->quatern_c = s.quatern[1];
  h->quatern_d = s.quatern[2];
  h->qoffset_x = s.quatern[3];
  h->qoffset_y = s.quatern[4];
  h->qoffset_z = s.quatern[5];
  for (int c = 0; c < 4; ++c) {
    h->srow_x[c] = s.srow[0][c];
    h->srow_y[c] = s.srow[1][c];
    h->srow_z[c] = s.srow[2][c];
  }
}

// The header, the 4-byte extension flag, any extension, ready to precede the data.
inline std::string HeaderBytes(const HeaderSpec& s) {
  const int header_size = s.version == 1 ? 348 : 540;
  const int ext_size =
      s.extension.empty() ? 0 : 8 + static_cast<int>((s.extension.size() + 15) / 16 * 16);
  const int vox_offset = header_size + 4 + ext_size;
  std::string bytes;
  if (s.version == 1) {
    nifti_1_header h;
    std::memset(&h, 0, sizeof h);
    h.sizeof_hdr = 348;
    std::memcpy(h.magic, "n+1", 4);
    FillCommon(s, vox_offset, &h);
    if (s.big_endian) {
      SwapInPlace(&h.sizeof_hdr, 4);
      for (auto& d : h.dim) SwapInPlace(&d, 2);
      SwapInPlace(&h.datatype, 2);
      SwapInPlace(&h.bitpix, 2);
      for (auto& p : h.pixdim) SwapInPlace(&p, 4);
      SwapInPlace(&h.vox_offset, 4);
      SwapInPlace(&h.scl_slope, 4);
      SwapInPlace(&h.scl_inter, 4);
      SwapInPlace(&h.qform_code, 2);
      SwapInPlace(&h.sform_code, 2);
      for (float* f : {&h.quatern_b, &h.quatern_c, &h.quatern_d, &h.qoffset_x, &h.qoffset_y,
                       &h.qoffset_z}) {
        SwapInPlace(f, 4);
      }
      for (int c = 0; c < 4; ++c) {
        SwapInPlace(&h.srow_x[c], 4);
        SwapInPlace(&h.srow_y[c], 4);
        SwapInPlace(&h.srow_z[c], 4);
      }
    }
    bytes.assign(reinterpret_cast<const char*>(&h), sizeof h);
  } else {
    nifti_2_header h;
    std::memset(&h, 0, sizeof h);
    h.sizeof_hdr = 540;
    std::memcpy(h.magic, "n+2\0\r\n\032\n", 8);
    FillCommon(s, vox_offset, &h);
    bytes.assign(reinterpret_cast<const char*>(&h), sizeof h);
  }
  std::string flag(4, '\0');
  if (ext_size > 0) flag[0] = 1;
  bytes += flag;
  if (ext_size > 0) {
    int32_t esize = ext_size, ecode = 0;  // ecode 0: NIFTI_ECODE_IGNORE
    bytes.append(reinterpret_cast<const char*>(&esize), 4);
    bytes.append(reinterpret_cast<const char*>(&ecode), 4);
    std::string content(s.extension.begin(), s.extension.end());
    content.resize(static_cast<size_t>(ext_size - 8), '\0');
    bytes += content;
  }
  return bytes;
}

// Writes `bytes` to `path`, gzip-compressed (level 6) when the name ends in ".gz".
inline void WriteBytes(const std::string& path, const std::string& bytes) {
  if (path.size() > 3 && path.compare(path.size() - 3, 3, ".gz") == 0) {
    gzFile out = gzopen(path.c_str(), "wb6");
    gzwrite(out, bytes.data(), static_cast<unsigned>(bytes.size()));
    gzclose(out);
  } else {
    std::ofstream(path, std::ios::binary) << bytes;
  }
}

template <typename T>
std::string RawBytes(const std::vector<T>& values, bool big_endian = false) {
  std::string bytes(reinterpret_cast<const char*>(values.data()), values.size() * sizeof(T));
  if (big_endian) {
    for (size_t i = 0; i < bytes.size(); i += sizeof(T)) SwapInPlace(&bytes[i], sizeof(T));
  }
  return bytes;
}

inline std::string ReadBytes(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  return std::string(std::istreambuf_iterator<char>(in), {});
}

}  // namespace boldsum::testing
