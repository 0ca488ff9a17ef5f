// Reading and writing the files boldsum touches: NIfTI images (through nifticlib),
// TSV tables, and any output file (always written under a temporary name and renamed).
#pragma once

#include <Eigen/Dense>
#include <array>
#include <cstdint>
#include <memory>
#include <string>
#include <vector>

#include "boldsum/error.h"

namespace boldsum {

// The grid and orientation of an image, as needed to write outputs on the same grid.
struct ImageGeometry {
  std::array<int, 3> dims = {0, 0, 0};              // nx, ny, nz
  int n_volumes = 1;                                // nt (1 for a 3D image)
  std::array<double, 3> voxel_mm = {1.0, 1.0, 1.0};
  double tr_s = 0.0;                                // pixdim[4] in seconds; 0 if unknown
                                                    // (an unset time unit means seconds)
  int nifti_version = 1;                            // 1 or 2, from the file's header
  // Orientation, copied verbatim to outputs.
  int qform_code = 0, sform_code = 0;
  double quatern_b = 0, quatern_c = 0, quatern_d = 0;
  double qoffset_x = 0, qoffset_y = 0, qoffset_z = 0, qfac = 1;
  std::array<std::array<double, 4>, 3> srow = {{{1, 0, 0, 0}, {0, 1, 0, 0}, {0, 0, 1, 0}}};

  int64_t n_voxels() const { return int64_t{dims[0]} * dims[1] * dims[2]; }
  // True when grid and orientation agree (to 1e-4 mm / 1e-6 in the quaternion).
  bool SameSpace(const ImageGeometry& other) const;
  // World (mm) coordinates of voxel (x, y, z), by the NIfTI-1 rules in the order a
  // reader prefers them: the sform when sform_code > 0, else the qform when
  // qform_code > 0, else voxel * voxel_mm.
  std::array<double, 3> WorldPosition(int64_t x, int64_t y, int64_t z) const;
};

// Reads only the header. Throws Error("<path>: ...") when the file is missing, not
// NIfTI, or has a datatype other than uint8, int16, int32, float32 or float64.
// Lengths in metres or microns are converted to mm.
ImageGeometry ReadImageGeometry(const std::string& path);

// A whole 3D image (or the first volume of a 4D one), scl_slope/scl_inter applied,
// voxel index i = x + nx*(y + ny*z).
std::vector<float> ReadVolume(const std::string& path, ImageGeometry* geometry);

// Streams a 4D image in blocks of whole volumes, keeping only the voxels listed in
// `voxels` (linear indices, increasing). Reading and decompression run on a background
// thread, ahead of the caller by a few tiles of volumes; Next() picks the voxels out of
// them on the caller's thread, so that the background thread does nothing else.
class VolumeStream {
 public:
  // With `sum_grid`, the reader thread also sums every voxel of the grid over the
  // volumes it reads (see GridSums), so that a caller needing the mean image need not
  // gather the whole grid.
  VolumeStream(const std::string& path, std::vector<int64_t> voxels, int block_volumes,
               bool sum_grid = false);
  ~VolumeStream();
  VolumeStream(const VolumeStream&) = delete;
  VolumeStream& operator=(const VolumeStream&) = delete;

  const ImageGeometry& geometry() const;
  // Fills `block` (rows = next volumes, at most block_volumes; cols = voxels) with
  // scl_slope/scl_inter applied. Returns false, leaving `block` untouched, at the end.
  // Throws Error("<path>: ...") on a truncated or corrupt file.
  bool Next(Eigen::MatrixXf* block);
  // With sum_grid, once Next() has returned false: per grid voxel (linear index), the
  // sum of its values (scaled as in Next) over all volumes.
  const std::vector<double>& GridSums() const;

 private:
  struct Impl;
  std::unique_ptr<Impl> impl_;
};

// Writes a float32 NIfTI-1 image (gzip level 1 when the name ends in .gz) with the
// geometry's grid and orientation; n_volumes volumes of geometry.n_voxels() values
// each, voxel-fastest. Written to a temporary name, checked by reading the header
// back, then renamed over `path`. Throws Error on failure, leaving `path` untouched.
void WriteImage(const std::string& path, const ImageGeometry& geometry,
                const std::vector<float>& values, int n_volumes = 1);

// A tab-separated table. Row r of `rows` is line r + 2 of the file (line 1 is the
// header). Throws Error with file:line when a row has the wrong number of cells.
struct Table {
  std::string path;
  std::vector<std::string> header;
  std::vector<std::vector<std::string>> rows;

  int ColumnIndex(const std::string& name) const;  // -1 when absent
  SourceLocation CellLocation(int row, int column) const;  // 1-based line and column
};
Table ReadTable(const std::string& path);

// Strict number parsing: the whole cell must be a finite decimal number.
bool ParseNumber(const std::string& cell, double* value);

// A numeric table read from TSV: the ROI time series (regions as columns) or
// confounds. `na_cells` lists (row, column) of cells that were `n/a`; they hold NaN.
// Throws Error at the cell (file:line:column, the value) for a non-numeric cell.
struct NumericTable {
  std::string path;
  std::vector<std::string> names;
  Eigen::MatrixXd values;  // rows = data rows
  std::vector<std::pair<int, int>> na_cells;
};
NumericTable ReadNumericTable(const std::string& path, bool allow_na);

// Writes `contents` to `path` through a temporary file in the same folder and a
// rename, so that readers see the old file or the new one, never a part.
void WriteFileAtomically(const std::string& path, const std::string& contents);
// A whole file's bytes. Throws Error("<path>: cannot read the file").
std::string ReadFileBytes(const std::string& path);

// SHA-256 of a file's bytes, as 64 lowercase hex digits. Throws Error if unreadable.
std::string FileSha256(const std::string& path);
std::string Sha256(const std::string& bytes);

// Minimal JSON text building for summary files. JsonQuote escapes per RFC 8259 and
// replaces ill-formed UTF-8 by U+FFFD, so its output is always valid JSON.
std::string JsonQuote(const std::string& text);
// Shortest round-trip form, laid out as Python's repr ("0.1", "1e-05", "1e+16", "3"),
// "-0.0" for negative zero; null for NaN/Inf.
std::string JsonNumber(double value);

}  // namespace boldsum
