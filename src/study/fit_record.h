// The saved fit of a subject: everything needed to evaluate any contrast again without
// reading the 4D data (per run beta, sigma2, rho, validity, the three Gram matrices and
// the kept columns; the fitted voxel list). Stored as OUT/<subject>/fit_params.bin.
#pragma once

#include <cstdint>
#include <string>
#include <vector>

#include "boldsum/fit.h"

namespace boldsum {

struct FitRecord {
  std::vector<int64_t> voxels;  // images: linear voxel indices; ROI tables: empty
  std::vector<RunFit> runs;
};

// Serialises doubles bit for bit (little-endian, as on every platform we build for),
// so a contrast evaluated from a loaded record equals one from a fresh fit, bitwise.
std::string SerializeFitRecord(const FitRecord& record);
// The same bytes from a fit's voxel list and runs, without copying them into a FitRecord.
std::string SerializeFitRecord(const std::vector<int64_t>& voxels, const std::vector<RunFit>& runs);

// Throws Error("<path>: ...") when the file is missing, truncated or of another format.
FitRecord LoadFitRecord(const std::string& path);

}  // namespace boldsum
