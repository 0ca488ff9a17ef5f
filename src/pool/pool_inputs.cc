#include "pool/pool_inputs.h"

#include <algorithm>
#include <cmath>
#include <cstring>
#include <filesystem>
#include <limits>
#include <map>
#include <set>
#include <tuple>
#include <utility>

namespace boldsum {
namespace {

namespace fs = std::filesystem;
constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
const char* const kEstimateSuffixes[] = {".estimate.nii.gz", ".estimate.nii"};
const char* const kRegionColumns[] = {"subject", "contrast", "region", "estimate", "variance"};

bool EndsWith(const std::string& text, const std::string& suffix) {
  return text.size() >= suffix.size() &&
         text.compare(text.size() - suffix.size(), suffix.size(), suffix) == 0;
}

// The first of `folder/stem + suffix` that exists, or "".
std::string FindImage(const std::string& folder, const std::string& stem) {
  for (const char* extension : {".nii.gz", ".nii"}) {
    const fs::path candidate = fs::path(folder) / (stem + extension);
    if (fs::is_regular_file(candidate)) return candidate.string();
  }
  return "";
}

std::string JoinNames(const std::vector<std::string>& names) {
  std::string text;
  for (const std::string& name : names) text += (text.empty() ? "" : ", ") + name;
  return text;
}

bool DescribeImages(const std::string& folder, const std::vector<std::string>& stems,
                    const SourceLocation& where, PoolInput* input, Diagnostics* diagnostics) {
  const int errors_before = diagnostics->ErrorCount();
  const std::string subjects_path = (fs::path(folder) / "subjects.tsv").string();
  try {
    const Table table = ReadTable(subjects_path);
    int column = table.ColumnIndex("subject");
    if (column < 0) column = table.ColumnIndex("participant_id");
    if (column < 0) column = 0;
    std::map<std::string, int> seen;
    for (int r = 0; r < static_cast<int>(table.rows.size()); ++r) {
      const std::string& id = table.rows[r][column];
      if (id.empty()) {
        diagnostics->AddError(table.CellLocation(r, column), "empty subject id");
      } else if (!seen.emplace(SubjectKey(id), r).second) {
        diagnostics->AddError(table.CellLocation(r, column),
                              "subject '" + id + "' appears twice (also on line " +
                                  std::to_string(seen[SubjectKey(id)] + 2) + ")");
      }
      input->subjects.push_back(id);
    }
    if (table.rows.empty()) {
      diagnostics->AddError({subjects_path, 0, 0}, "no subjects: the table has no rows");
    }
  } catch (const Error& e) {
    diagnostics->AddError(e.where().file.empty() ? SourceLocation{subjects_path, 0, 0} : e.where(),
                          e.what());
  }
  const std::string mask_path = FindImage(folder, "mask");
  ImageGeometry mask;
  if (mask_path.empty()) {
    diagnostics->AddError(where, "input folder '" + folder + "' has no mask.nii.gz");
  } else {
    try {
      mask = ReadImageGeometry(mask_path);
    } catch (const Error& e) {
      diagnostics->AddError(where, e.what());
    }
  }
  for (const std::string& stem : stems) {
    const std::string estimate = FindImage(folder, stem + ".estimate");
    const std::string variance = FindImage(folder, stem + ".variance");
    if (variance.empty()) {
      diagnostics->AddError(where, "contrast '" + stem + "' has " + estimate +
                                       " but no matching " + stem + ".variance.nii.gz");
      continue;
    }
    for (const std::string& path : {estimate, variance}) {
      try {
        const ImageGeometry geometry = ReadImageGeometry(path);
        if (!input->subjects.empty() &&
            geometry.n_volumes != static_cast<int>(input->subjects.size())) {
          diagnostics->AddError({path, 0, 0}, "has " + std::to_string(geometry.n_volumes) +
                                                  " volumes but subjects.tsv lists " +
                                                  std::to_string(input->subjects.size()) +
                                                  " subjects (volume i is row i)");
        }
        if (!mask_path.empty() && mask.n_voxels() > 0 && !geometry.SameSpace(mask)) {
          diagnostics->AddError({path, 0, 0}, "grid or orientation differs from " + mask_path);
        }
      } catch (const Error& e) {
        diagnostics->AddError({path, 0, 0}, e.what());
      }
    }
    input->contrasts.push_back(stem);
  }
  return diagnostics->ErrorCount() == errors_before;
}

bool DescribeRegions(const std::string& path, PoolInput* input, Diagnostics* diagnostics) {
  const int errors_before = diagnostics->ErrorCount();
  Table table;
  try {
    table = ReadTable(path);
  } catch (const Error& e) {
    diagnostics->AddError(e.where().file.empty() ? SourceLocation{path, 0, 0} : e.where(),
                          e.what());
    return false;
  }
  std::vector<int> columns;
  for (const char* name : kRegionColumns) {
    columns.push_back(table.ColumnIndex(name));
    if (columns.back() < 0) {
      diagnostics->AddError({path, 1, 0}, std::string("missing column '") + name +
                                              "'; a summaries table needs the columns "
                                              "subject, contrast, region, estimate, variance");
    }
  }
  if (diagnostics->ErrorCount() > errors_before) return false;
  std::set<std::string> subjects_seen, contrasts;
  std::map<std::tuple<std::string, std::string, std::string>, int> rows_seen;
  for (int r = 0; r < static_cast<int>(table.rows.size()); ++r) {
    const std::vector<std::string>& row = table.rows[r];
    for (int i = 0; i < 3; ++i) {
      if (row[columns[i]].empty()) {
        diagnostics->AddError(table.CellLocation(r, columns[i]),
                              std::string("empty ") + kRegionColumns[i]);
      }
    }
    for (int i = 3; i < 5; ++i) {
      double value = 0;
      const std::string& cell = row[columns[i]];
      if (cell != "n/a" && !ParseNumber(cell, &value)) {
        diagnostics->AddError(table.CellLocation(r, columns[i]),
                              std::string("column '") + kRegionColumns[i] +
                                  "': expected a finite number or n/a, got '" + cell + "'");
      }
    }
    const std::string& subject = row[columns[0]];
    const auto key = std::make_tuple(SubjectKey(subject), row[columns[1]], row[columns[2]]);
    const auto [it, added] = rows_seen.emplace(key, r);
    if (!added) {
      diagnostics->AddError(table.CellLocation(r, 0),
                            "subject '" + subject + "', contrast '" + row[columns[1]] +
                                "', region '" + row[columns[2]] + "' repeats line " +
                                std::to_string(it->second + 2));
    }
    if (subjects_seen.insert(SubjectKey(subject)).second) input->subjects.push_back(subject);
    contrasts.insert(row[columns[1]]);
  }
  if (table.rows.empty()) diagnostics->AddError({path, 0, 0}, "the table has no rows");
  input->contrasts.assign(contrasts.begin(), contrasts.end());
  return diagnostics->ErrorCount() == errors_before;
}

}  // namespace

std::string SubjectKey(const std::string& id) {
  return id.rfind("sub-", 0) == 0 ? id.substr(4) : id;
}

bool DescribePoolInput(const std::string& path, const SourceLocation& where, PoolInput* input,
                       Diagnostics* diagnostics) {
  *input = PoolInput();
  std::error_code error;
  if (fs::is_regular_file(path, error) && EndsWith(path, ".tsv")) {
    input->kind = PoolInputKind::kRegions;
    input->table_path = path;
    input->folder = fs::path(path).parent_path().string();
    return DescribeRegions(path, input, diagnostics);
  }
  if (!fs::is_directory(path, error)) {
    diagnostics->AddError(where, "input '" + path +
                                     "' is neither a folder nor a .tsv table (it must be a "
                                     "pool-ready folder or a ROI summaries table)");
    return false;
  }
  input->folder = path;
  std::vector<std::string> stems;
  for (const fs::directory_entry& entry : fs::directory_iterator(path, error)) {
    const std::string name = entry.path().filename().string();
    for (const char* suffix : kEstimateSuffixes) {
      if (EndsWith(name, suffix)) stems.push_back(name.substr(0, name.size() - strlen(suffix)));
    }
  }
  std::sort(stems.begin(), stems.end());
  stems.erase(std::unique(stems.begin(), stems.end()), stems.end());
  const std::string table = (fs::path(path) / "summaries.tsv").string();
  const bool has_table = fs::is_regular_file(table, error);
  if (!stems.empty() && has_table) {
    diagnostics->AddError(where, "input folder '" + path + "' holds both image stacks (" +
                                     JoinNames(stems) +
                                     ") and summaries.tsv; name the table file to pool regions");
    return false;
  }
  if (has_table) {
    input->kind = PoolInputKind::kRegions;
    input->table_path = table;
    return DescribeRegions(table, input, diagnostics);
  }
  if (stems.empty()) {
    diagnostics->AddError(where, "input folder '" + path +
                                     "' holds neither <contrast>.estimate.nii.gz stacks nor "
                                     "summaries.tsv");
    return false;
  }
  input->kind = PoolInputKind::kImages;
  return DescribeImages(path, stems, where, input, diagnostics);
}

std::vector<int64_t> ReadPoolMask(const PoolInput& input, ImageGeometry* geometry) {
  const std::string mask_path = FindImage(input.folder, "mask");
  if (mask_path.empty()) throw Error(input.folder + ": no mask.nii.gz");
  const std::vector<float> mask = ReadVolume(mask_path, geometry);
  std::vector<int64_t> voxels;
  for (size_t i = 0; i < mask.size(); ++i) {
    if (std::isfinite(mask[i]) && mask[i] != 0) voxels.push_back(static_cast<int64_t>(i));
  }
  return voxels;
}

void ReadImageSlab(const PoolInput& input, const std::string& contrast,
                   const ImageGeometry& geometry, const std::vector<int64_t>& voxels,
                   Eigen::MatrixXd* estimates, Eigen::MatrixXd* variances) {
  const Eigen::Index n = static_cast<Eigen::Index>(input.subjects.size());
  for (const char* kind : {"estimate", "variance"}) {
    const std::string path = FindImage(input.folder, contrast + "." + kind);
    if (path.empty()) throw Error(input.folder + ": no " + contrast + "." + kind + ".nii.gz");
    Eigen::MatrixXd& target = std::string(kind) == "estimate" ? *estimates : *variances;
    target.resize(n, static_cast<Eigen::Index>(voxels.size()));
    VolumeStream stream(path, voxels, 16);
    if (stream.geometry().n_volumes != n) {
      throw Error(SourceLocation{path, 0, 0},
                  "has " + std::to_string(stream.geometry().n_volumes) + " volumes but " +
                      std::to_string(n) + " subjects are listed");
    }
    if (!stream.geometry().SameSpace(geometry)) {
      throw Error(SourceLocation{path, 0, 0}, "grid or orientation differs from the mask's");
    }
    Eigen::MatrixXf block;
    Eigen::Index row = 0;
    while (stream.Next(&block)) {
      if (row + block.rows() > n) break;
      target.middleRows(row, block.rows()) = block.cast<double>();
      row += block.rows();
    }
    if (row != n) {
      throw Error(SourceLocation{path, 0, 0},
                  "delivered " + std::to_string(row) + " volumes, expected " + std::to_string(n));
    }
  }
}

PoolData ReadRegionData(const PoolInput& input, const std::string& contrast) {
  const Table table = ReadTable(input.table_path);
  std::vector<int> columns;
  for (const char* name : kRegionColumns) {
    columns.push_back(table.ColumnIndex(name));
    if (columns.back() < 0) {
      throw Error(SourceLocation{input.table_path, 1, 0},
                  std::string("missing column '") + name + "'");
    }
  }
  std::map<std::string, int> subject_index, region_index;
  for (size_t i = 0; i < input.subjects.size(); ++i) {
    subject_index[SubjectKey(input.subjects[i])] = static_cast<int>(i);
  }
  PoolData data;
  std::vector<std::pair<int, int>> rows;  // (table row, region)
  for (int r = 0; r < static_cast<int>(table.rows.size()); ++r) {
    if (table.rows[r][columns[1]] != contrast) continue;
    const std::string& region = table.rows[r][columns[2]];
    auto [it, added] = region_index.emplace(region, static_cast<int>(data.regions.size()));
    if (added) data.regions.push_back(region);
    rows.emplace_back(r, it->second);
  }
  const Eigen::Index n = static_cast<Eigen::Index>(input.subjects.size());
  const Eigen::Index regions = static_cast<Eigen::Index>(data.regions.size());
  data.estimates.setConstant(n, regions, kNaN);
  data.variances.setConstant(n, regions, kNaN);
  for (const auto& [r, region] : rows) {
    const std::vector<std::string>& row = table.rows[r];
    const auto subject = subject_index.find(SubjectKey(row[columns[0]]));
    if (subject == subject_index.end()) {
      throw Error(table.CellLocation(r, columns[0]),
                  "subject '" + row[columns[0]] + "' was not in the table when it was checked");
    }
    for (int i = 3; i < 5; ++i) {
      double value = kNaN;
      const std::string& cell = row[columns[i]];
      if (cell != "n/a" && !ParseNumber(cell, &value)) {
        throw Error(table.CellLocation(r, columns[i]),
                    std::string("column '") + kRegionColumns[i] +
                        "': expected a finite number or n/a, got '" + cell + "'");
      }
      (i == 3 ? data.estimates : data.variances)(subject->second, region) = value;
    }
  }
  return data;
}


}  // namespace boldsum
