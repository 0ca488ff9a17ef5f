#include "config/bids_tree.h"

#include <algorithm>
#include <system_error>

#include "config/json_members.h"

namespace boldsum::config {

namespace fs = std::filesystem;

const BidsTree::Listing& BidsTree::List(const fs::path& absolute_folder) {
  const std::string key = absolute_folder.string();
  const auto found = listings_.find(key);
  if (found != listings_.end()) return found->second;
  Listing listing;
  std::error_code error;
  for (fs::directory_iterator it(absolute_folder, error), end; !error && it != end;
       it.increment(error)) {
    const std::string name = it->path().filename().string();
    std::error_code status_error;
    const fs::file_status status = fs::status(it->path(), status_error);
    if (fs::is_directory(status)) {
      listing.folders.push_back(name);
    } else if (fs::is_regular_file(status)) {
      listing.files.push_back(name);
    } else if (!fs::exists(status) && it->is_symlink(status_error)) {
      listing.broken.push_back(name);
    }
  }
  std::sort(listing.files.begin(), listing.files.end());
  std::sort(listing.folders.begin(), listing.folders.end());
  std::sort(listing.broken.begin(), listing.broken.end());
  return listings_.emplace(key, std::move(listing)).first->second;
}

void BidsTree::AddProblem(SourceLocation where, std::string message) {
  const std::string text = where.ToString() + ": " + message;
  if (!problem_texts_.insert(text).second) return;
  problems_.push_back(DatasetProblem{std::move(where), std::move(message)});
}

std::optional<fs::path> BidsTree::Nearest(const TreeRoot& root, const fs::path& rel_dir,
                                          const BidsName& data, const std::string& suffix,
                                          const std::string& extension,
                                          const std::function<bool(const fs::path&)>& accept) {
  fs::path level = rel_dir;
  while (true) {
    std::vector<std::pair<std::size_t, std::string>> applicable;  // entity count, name
    for (const std::string& name : List(root.absolute / level).files) {
      const std::optional<BidsName> parsed = ParseBidsName(name);
      if (!parsed || parsed->suffix != suffix || parsed->extension != extension) continue;
      if (!AppliesTo(*parsed, data) || !accept(level / name)) continue;
      applicable.emplace_back(parsed->entities.size(), name);
    }
    if (!applicable.empty()) {
      std::stable_sort(applicable.begin(), applicable.end(),
                       [](const auto& a, const auto& b) { return a.first > b.first; });
      if (applicable.size() > 1 && applicable[0].first == applicable[1].first) {
        const std::string data_name = data.Stem({}) + "_" + data.suffix + data.extension;
        AddProblem(SourceLocation{(root.shown / level / applicable[1].second).string(), 0, 0},
                   "this file and " + applicable[0].second + " both apply to " +
                       (rel_dir / data_name).string() +
                       " from the same folder; BIDS allows only one");
      }
      return level / applicable[0].second;
    }
    if (level.empty()) return std::nullopt;
    level = level.parent_path();
  }
}

const std::optional<SidecarTr>& BidsTree::SidecarRepetitionTime(const fs::path& absolute,
                                                                const fs::path& shown) {
  const auto found = sidecars_.find(absolute.string());
  if (found != sidecars_.end()) return found->second;
  std::optional<SidecarTr> tr;
  try {
    std::vector<JsonMember> members = ReadJsonMembers(absolute.string());
    int count = 0;
    for (JsonMember& member : members) {
      if (member.name != "RepetitionTime") continue;
      member.where.file = shown.string();
      if (++count > 1) {
        AddProblem(member.where, "RepetitionTime is given twice");
      } else if (!member.is_number || member.number <= 0) {
        AddProblem(member.where,
                   "RepetitionTime must be a number of seconds > 0, got " + member.text);
      } else {
        tr = SidecarTr{member.number, member.where};
      }
    }
    if (count > 1) tr.reset();
  } catch (const Error& error) {
    SourceLocation where = error.where();
    where.file = shown.string();
    AddProblem(where, error.message());
  }
  return sidecars_.emplace(absolute.string(), tr).first->second;
}

std::optional<SidecarTr> BidsTree::FindRepetitionTime(const std::vector<TreeRoot>& roots,
                                                      const fs::path& rel_dir,
                                                      const BidsName& data) {
  for (const TreeRoot& root : roots) {
    const auto accept = [&](const fs::path& rel) {
      return SidecarRepetitionTime(root.absolute / rel, root.shown / rel).has_value();
    };
    if (auto rel = Nearest(root, rel_dir, data, "bold", ".json", accept)) {
      return SidecarRepetitionTime(root.absolute / *rel, root.shown / *rel);
    }
  }
  return std::nullopt;
}

}  // namespace boldsum::config
