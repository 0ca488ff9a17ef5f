#include "config/bids_discovery.h"

#include <algorithm>
#include <map>
#include <system_error>

namespace boldsum::config {

namespace fs = std::filesystem;

namespace {

struct Candidate {
  BidsName name;
  fs::path rel_dir;  // folder under the bold root
  std::string file;
  std::size_t folder_index;  // position of rel_dir among the subject's func folders
};

// A report line about one image, ordered like the listing: by folder, then name.
struct ImageSkip {
  std::size_t folder_index;
  std::string file;
  std::string line;
};

bool EndsWith(const std::string& text, const std::string& suffix) {
  return text.size() >= suffix.size() &&
         text.compare(text.size() - suffix.size(), suffix.size(), suffix) == 0;
}

std::string Counted(std::size_t n, const std::string& one, const std::string& many) {
  return std::to_string(n) + " " + (n == 1 ? one : many);
}

// The name of the raw file a (possibly preprocessed) bold image was made from.
BidsName RawName(const BidsName& name) {
  BidsName raw = name;
  raw.entities.clear();
  for (const auto& entity : name.entities) {
    const auto& drop = DerivativeEntities();
    if (std::find(drop.begin(), drop.end(), entity.first) == drop.end()) {
      raw.entities.push_back(entity);
    }
  }
  return raw;
}

// Why a bold image of the task fails the session/space/desc filters; "" when it passes.
std::string FilterProblem(const BidsName& name, const BidsQuery& query) {
  const std::vector<std::pair<std::string, const std::string*>> filters = {
      {"ses", &query.session}, {"space", &query.space}, {"desc", &query.desc}};
  for (const auto& [key, wanted] : filters) {
    const std::string label = name.Get(key);
    if (wanted->empty() || label == *wanted) continue;
    const std::string word = key == "ses" ? "session" : key;
    return "not " + word + " " + *wanted + " (" +
           (label.empty() ? "no " + key + "- entity" : key + "-" + label) + ")";
  }
  return "";
}

bool RunLess(const Candidate& a, const Candidate& b) {
  const std::string sa = a.name.Get("ses"), sb = b.name.Get("ses");
  if (sa != sb) return NaturalLess(sa, sb);
  const std::string ra = a.name.Get("run"), rb = b.name.Get("run");
  if (ra != rb) return ra.empty() || (!rb.empty() && NaturalLess(ra, rb));
  return a.file < b.file;
}

// Subject labels with a folder in either tree, in natural order.
std::vector<std::string> SubjectLabels(BidsTree& tree, const BidsQuery& query) {
  std::vector<std::string> labels;
  for (const TreeRoot* root : {&query.bold_root, &query.dataset}) {
    for (const std::string& folder : tree.List(root->absolute).folders) {
      if (folder.rfind("sub-", 0) != 0 || !IsBidsLabel(folder.substr(4))) continue;
      if (std::find(labels.begin(), labels.end(), folder.substr(4)) == labels.end()) {
        labels.push_back(folder.substr(4));
      }
    }
  }
  std::sort(labels.begin(), labels.end(), NaturalLess);
  return labels;
}

// func folders of one subject under the bold root: sub-X/func, then sub-X/ses-Y/func
// by session label.
std::vector<fs::path> FuncFolders(BidsTree& tree, const TreeRoot& root, const std::string& id) {
  std::vector<fs::path> folders;
  const BidsTree::Listing& listing = tree.List(root.absolute / id);
  const auto has_func = [&](const fs::path& rel) {
    const auto& names = tree.List(root.absolute / rel).folders;
    return std::find(names.begin(), names.end(), "func") != names.end();
  };
  if (has_func(id)) folders.push_back(fs::path(id) / "func");
  std::vector<std::string> sessions;
  for (const std::string& folder : listing.folders) {
    if (folder.rfind("ses-", 0) == 0 && IsBidsLabel(folder.substr(4))) sessions.push_back(folder);
  }
  std::sort(sessions.begin(), sessions.end(), [](const std::string& a, const std::string& b) {
    return NaturalLess(a.substr(4), b.substr(4));
  });
  for (const std::string& session : sessions) {
    if (has_func(fs::path(id) / session)) folders.push_back(fs::path(id) / session / "func");
  }
  return folders;
}

ResolvedPath Under(const TreeRoot& root, const fs::path& rel) {
  return {(root.absolute / rel).lexically_normal().string(),
          (root.shown / rel).lexically_normal().string()};
}

}  // namespace

const std::vector<std::string>& ConfoundsPlaceholders() {
  static const std::vector<std::string> names = {"stem", "subject", "session"};
  return names;
}

std::string UnknownPlaceholder(const std::string& pattern) {
  for (std::size_t open = pattern.find('{'); open != std::string::npos;
       open = pattern.find('{', open + 1)) {
    const std::size_t close = pattern.find('}', open);
    if (close == std::string::npos) return "{";
    const std::string name = pattern.substr(open + 1, close - open - 1);
    const auto& known = ConfoundsPlaceholders();
    if (std::find(known.begin(), known.end(), name) == known.end()) {
      return "{" + name + "}";
    }
  }
  return "";
}

std::string ExpandConfoundsPattern(const std::string& pattern, const BidsName& bold) {
  const std::string session = bold.Get("ses");
  const std::map<std::string, std::string> values = {
      {"stem", bold.Stem(DerivativeEntities())},
      {"subject", "sub-" + bold.Get("sub")},
      {"session", session.empty() ? "" : "ses-" + session}};
  std::string out;
  std::size_t at = 0;
  while (at < pattern.size()) {
    const std::size_t open = pattern.find('{', at);
    const std::size_t close = open == std::string::npos ? open : pattern.find('}', open);
    if (close == std::string::npos) break;
    out += pattern.substr(at, open - at);
    const auto value = values.find(pattern.substr(open + 1, close - open - 1));
    out += value == values.end() ? pattern.substr(open, close - open + 1) : value->second;
    at = close + 1;
  }
  if (at < pattern.size()) out += pattern.substr(at);
  return out;
}

BidsDiscovery DiscoverBids(const BidsQuery& query) {
  BidsTree tree;
  BidsDiscovery result;
  const bool separate = query.bold_root.absolute != query.dataset.absolute;
  std::vector<TreeRoot> sidecar_roots = {query.bold_root};
  if (separate) sidecar_roots.push_back(query.dataset);
  std::vector<std::string> skipped;
  std::map<std::string, int> other_tasks;
  for (const std::string& label : SubjectLabels(tree, query)) {
    const std::string id = "sub-" + label;
    std::vector<Candidate> candidates;
    std::vector<ImageSkip> image_skips;
    int task_images = 0;
    const std::vector<fs::path> func_folders = FuncFolders(tree, query.bold_root, id);
    for (std::size_t folder_index = 0; folder_index < func_folders.size(); ++folder_index) {
      const fs::path& rel_dir = func_folders[folder_index];
      const BidsTree::Listing& listing = tree.List(query.bold_root.absolute / rel_dir);
      std::vector<std::pair<std::string, bool>> names;  // name, is a broken link
      for (const std::string& name : listing.files) names.emplace_back(name, false);
      for (const std::string& name : listing.broken) names.emplace_back(name, true);
      std::sort(names.begin(), names.end());
      const std::string folder = rel_dir.parent_path().filename().string();
      const std::string folder_session = folder.rfind("ses-", 0) == 0 ? folder.substr(4) : "";
      for (const auto& [name, broken] : names) {
        if (!EndsWith(name, "_bold.nii") && !EndsWith(name, "_bold.nii.gz")) continue;
        const std::string shown = "skipped " + (rel_dir / name).string() + ": ";
        const auto skip = [&, &name = name](const std::string& why) {
          image_skips.push_back(ImageSkip{folder_index, name, shown + why});
        };
        const std::optional<BidsName> parsed = ParseBidsName(name);
        if (!parsed) {
          skip("not a BIDS file name (<key>-<label> parts joined by '_')");
          continue;
        }
        if (parsed->Get("sub") != label || parsed->Get("ses") != folder_session) {
          skip("its sub-/ses- entities do not match its folder");
          continue;
        }
        const std::string task = parsed->Get("task");
        if (task != query.task) {
          ++other_tasks[task.empty() ? "(no task entity)" : task];
          continue;
        }
        ++task_images;
        const std::string filter_problem = FilterProblem(*parsed, query);
        if (!filter_problem.empty()) {
          skip(filter_problem);
        } else if (broken) {
          skip("a link to a missing file (is the image's content fetched?)");
        } else {
          candidates.push_back(Candidate{*parsed, rel_dir, name, folder_index});
        }
      }
    }
    std::stable_sort(candidates.begin(), candidates.end(), RunLess);
    FoundSubject subject{id, {}};
    std::map<std::string, std::string> first_with_stem;
    for (const Candidate& candidate : candidates) {
      const fs::path rel = candidate.rel_dir / candidate.file;
      const BidsName raw = RawName(candidate.name);
      const std::string stem = raw.Stem({});
      const auto [first, inserted] = first_with_stem.emplace(stem, candidate.file);
      if (!inserted) {
        tree.AddProblem(SourceLocation{Under(query.bold_root, rel).shown, 0, 0},
                        "the same run as " + first->second +
                            " (the names differ only in space, res, den or desc); choose one "
                            "with subjects_from.space or subjects_from.desc");
        continue;
      }
      const auto skip = [&](const std::string& why) {
        image_skips.push_back(ImageSkip{candidate.folder_index, candidate.file,
                                        "skipped " + rel.string() + ": " + why});
      };
      const auto events = tree.Nearest(query.dataset, candidate.rel_dir, raw, "events", ".tsv",
                                       [](const fs::path&) { return true; });
      if (!events) {
        skip("no events table " + (candidate.rel_dir / (stem + "_events.tsv")).string() +
             (separate ? " in the dataset" : "") + " (nor one inherited from a folder above)");
        continue;
      }
      FoundRun run;
      run.bold = Under(query.bold_root, rel);
      run.events = Under(query.dataset, *events);
      if (!query.confounds_pattern.empty()) {
        const fs::path confounds =
            (candidate.rel_dir / ExpandConfoundsPattern(query.confounds_pattern, candidate.name))
                .lexically_normal();
        std::error_code error;
        if (fs::is_regular_file(query.bold_root.absolute / confounds, error)) {
          run.confounds = Under(query.bold_root, confounds);
        } else if (query.confounds_required) {
          skip("no confounds table " + confounds.string());
          continue;
        }
      }
      run.sidecar_tr = tree.FindRepetitionTime(sidecar_roots, candidate.rel_dir, candidate.name);
      subject.runs.push_back(run);
    }
    std::stable_sort(
        image_skips.begin(), image_skips.end(), [](const ImageSkip& a, const ImageSkip& b) {
          return std::make_pair(a.folder_index, a.file) < std::make_pair(b.folder_index, b.file);
        });
    for (const ImageSkip& image_skip : image_skips) skipped.push_back(image_skip.line);
    if (subject.runs.empty()) {
      skipped.push_back("skipped " + id + ": " +
                        (task_images == 0 ? "no bold images of task " + query.task
                                          : "none of its bold images of task " + query.task +
                                                " could be used (see above)"));
    } else {
      result.run_count += static_cast<int>(subject.runs.size());
      result.subjects.push_back(subject);
    }
  }
  if (!other_tasks.empty()) {
    int total = 0;
    std::string list;
    for (const auto& [task, count] : other_tasks) {
      total += count;
      list += (list.empty() ? "" : ", ") + task + " (" + std::to_string(count) + ")";
    }
    skipped.push_back("skipped " + Counted(total, "bold image", "bold images") +
                      " of other tasks: " + list);
  }
  std::string filters = "task " + query.task;
  if (!query.session.empty()) filters += ", session " + query.session;
  if (!query.space.empty()) filters += ", space " + query.space;
  if (!query.desc.empty()) filters += ", desc " + query.desc;
  result.report.push_back("found " + Counted(result.subjects.size(), "subject", "subjects") + ", " +
                          Counted(static_cast<std::size_t>(result.run_count), "run", "runs") +
                          " (" + filters + ") in " + query.bold_root.shown.string() +
                          (separate ? "; events from " + query.dataset.shown.string() : ""));
  result.report.insert(result.report.end(), skipped.begin(), skipped.end());
  result.problems = tree.problems();
  return result;
}

}  // namespace boldsum::config
