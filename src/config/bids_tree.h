// Cached reads of a BIDS folder tree: folder listings, JSON sidecars, and the BIDS
// inheritance principle (a metadata file applies to every data file at or below its
// folder whose name has all of its entities; the nearest folder level wins, and within
// one level the file with the most entities).
#pragma once

#include <filesystem>
#include <functional>
#include <map>
#include <optional>
#include <set>
#include <string>
#include <vector>

#include "boldsum/error.h"
#include "config/bids_names.h"

namespace boldsum::config {

// A tree's top folder: `absolute` for reading, `shown` (as the user gave it) for messages.
struct TreeRoot {
  std::filesystem::path absolute;
  std::filesystem::path shown;
};

// A problem found in the dataset that stops the study (a malformed sidecar, two
// metadata files that apply equally). `where` is the file (and line:column when known).
struct DatasetProblem {
  SourceLocation where;
  std::string message;
};

// The RepetitionTime of a sidecar: seconds (> 0) and where the value is written.
struct SidecarTr {
  double seconds = 0.0;
  SourceLocation where;
};

class BidsTree {
 public:
  struct Listing {
    std::vector<std::string> files;    // regular files (links followed), sorted by name
    std::vector<std::string> folders;  // sorted by name
    std::vector<std::string> broken;   // links whose target is missing, sorted by name
  };

  // The folder's entries; empty when it is missing or unreadable.
  const Listing& List(const std::filesystem::path& absolute_folder);

  // Path relative to root.absolute of the metadata file `<entities>_<suffix><extension>`
  // that applies to `data` (in folder rel_dir under the root), searching rel_dir and each
  // folder above it up to the root, nearest first. Only files for which `accept` holds
  // count. A tie within one level is recorded as a problem and the first by name is used.
  std::optional<std::filesystem::path> Nearest(
      const TreeRoot& root, const std::filesystem::path& rel_dir, const BidsName& data,
      const std::string& suffix, const std::string& extension,
      const std::function<bool(const std::filesystem::path& rel)>& accept);

  // The RepetitionTime that applies to the bold file `data` in rel_dir: the nearest
  // `*_bold.json` sidecar defining it, looking in each root in turn (the derivatives
  // tree before the raw dataset). Malformed sidecars are recorded as problems.
  std::optional<SidecarTr> FindRepetitionTime(const std::vector<TreeRoot>& roots,
                                              const std::filesystem::path& rel_dir,
                                              const BidsName& data);

  // Each distinct problem once, in the order found.
  const std::vector<DatasetProblem>& problems() const { return problems_; }
  void AddProblem(SourceLocation where, std::string message);

 private:
  // A sidecar's RepetitionTime, read once per file; nullopt when absent or invalid.
  const std::optional<SidecarTr>& SidecarRepetitionTime(const std::filesystem::path& absolute,
                                                        const std::filesystem::path& shown);

  std::map<std::string, Listing> listings_;
  std::map<std::string, std::optional<SidecarTr>> sidecars_;
  std::vector<DatasetProblem> problems_;
  std::set<std::string> problem_texts_;
};

}  // namespace boldsum::config
