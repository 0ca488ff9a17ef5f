// GatherStudy: every subject's t-contrast maps (or region rows) stacked into
// OUT/pool-ready/ for the group stage, in config order (volume i = row i of subjects.tsv).
//
// F contrasts are not stacked: the group stage pools one estimate and one variance per
// subject, and an F contrast (q rows, a q x q covariance) has no such pair. Their maps
// stay in each subject's folder.
#include "study/gather.h"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <iterator>
#include <limits>
#include <map>
#include <ostream>
#include <sstream>

#include "boldsum/io.h"
#include "boldsum/study.h"
#include "pool/pool_inputs.h"
#include "study/fingerprint.h"
#include "study/output_stage.h"

namespace fs = std::filesystem;

namespace boldsum {
namespace {

constexpr float kNaN = std::numeric_limits<float>::quiet_NaN();
const char* const kRegionColumns[] = {"region", "estimate", "variance", "dof"};

struct SubjectInputs {
  const SubjectSpec* spec = nullptr;
  std::string folder;
  RecordedSubject record;
  std::string model_sha256;     // the fit's fingerprint, as summary.json records it
  ImageGeometry mask_geometry;  // images; dims stay 0 when the mask was unreadable
  // Region tables: per estimable t contrast, the cells (region, estimate, variance, dof)
  // of the subject's summary.tsv, verbatim.
  std::map<std::string, std::vector<std::vector<std::string>>> region_rows;
};

struct Participants {
  std::string path;
  std::vector<std::string> columns;                       // all but participant_id
  std::map<std::string, std::vector<std::string>> cells;  // by SubjectKey(participant_id)
};

// Everything the writers need, complete only when no problem was found.
struct GatherPlan {
  std::string root;
  DataKind kind = DataKind::kImage;
  std::vector<const ContrastSpec*> t_contrasts;
  std::vector<SubjectInputs> subjects;
  Participants participants;
};

std::string Join(const std::vector<std::string>& names) {
  std::string text;
  for (const std::string& name : names) text += (text.empty() ? "" : ", ") + name;
  return text;
}

std::string DescribeGrid(const ImageGeometry& g) {
  char text[160];
  std::snprintf(text, sizeof text, "%dx%dx%d voxels of %gx%gx%g mm", g.dims[0], g.dims[1],
                g.dims[2], g.voxel_mm[0], g.voxel_mm[1], g.voxel_mm[2]);
  return text;
}

// Empty when the subject's recorded fingerprint matches the config and its inputs;
// otherwise why it is out of date. `model_sha256` gets the recorded fit fingerprint.
std::string Staleness(const StudySpec& spec, const SubjectSpec& subject, const std::string& summary,
                      ChecksumCache* checksums, std::string* model_sha256) {
  const RecordedFingerprint recorded = ReadRecordedFingerprint(summary);
  if (!recorded.found) return "its summary.json records no fit fingerprint";
  *model_sha256 = recorded.fingerprint.model_sha256;
  SubjectFingerprint now;
  try {
    now = FingerprintSubject(spec, subject, checksums);
  } catch (const Error& error) {
    return error.what();
  }
  if (recorded.fingerprint.model_sha256 != now.model_sha256) {
    return "model settings or inputs changed since it was fitted";
  }
  if (recorded.fingerprint.contrasts_sha256 != now.contrasts_sha256) {
    return "contrasts changed since it was fitted";
  }
  return "";
}

void CheckImageFiles(const std::vector<const ContrastSpec*>& t_contrasts, SubjectInputs* subject,
                     std::vector<std::string>* problems) {
  const std::string mask = subject->folder + "/mask.nii.gz";
  try {
    const ImageGeometry geometry = ReadImageGeometry(mask);
    if (geometry.n_volumes != 1) {
      problems->push_back(mask + ": expected a 3D mask, found " +
                          std::to_string(geometry.n_volumes) + " volumes");
      return;
    }
    subject->mask_geometry = geometry;
  } catch (const Error& error) {
    problems->push_back(error.what());
    return;
  }
  for (const ContrastSpec* contrast : t_contrasts) {
    const RecordedContrast* recorded = subject->record.Find(contrast->name);
    if (!recorded || !recorded->estimable) continue;
    for (const char* kind : {".estimate.nii.gz", ".variance.nii.gz"}) {
      const std::string path = subject->folder + "/" + contrast->name + kind;
      try {
        const ImageGeometry geometry = ReadImageGeometry(path);
        if (geometry.n_volumes != 1 || !geometry.SameSpace(subject->mask_geometry)) {
          problems->push_back(path + ": not a 3D image on the grid of " + mask);
        }
      } catch (const Error& error) {
        problems->push_back(error.what());
      }
    }
  }
}

void CheckRegionRows(const std::vector<const ContrastSpec*>& t_contrasts, SubjectInputs* subject,
                     std::vector<std::string>* problems) {
  const std::string path = subject->folder + "/summary.tsv";
  Table table;
  try {
    table = ReadTable(path);
  } catch (const Error& error) {
    problems->push_back(error.what());
    return;
  }
  const int contrast_column = table.ColumnIndex("contrast");
  std::vector<int> columns;
  for (const char* name : kRegionColumns) columns.push_back(table.ColumnIndex(name));
  if (contrast_column < 0 || std::find(columns.begin(), columns.end(), -1) != columns.end()) {
    problems->push_back(path +
                        ":1: expected the columns contrast, region, estimate, variance, "
                        "dof");
    return;
  }
  for (const std::vector<std::string>& row : table.rows) {
    const RecordedContrast* recorded = subject->record.Find(row[contrast_column]);
    if (!recorded || recorded->is_f || !recorded->estimable) continue;
    std::vector<std::string> cells;
    for (int column : columns) cells.push_back(row[column]);
    subject->region_rows[recorded->name].push_back(cells);
  }
  for (const ContrastSpec* contrast : t_contrasts) {
    const RecordedContrast* recorded = subject->record.Find(contrast->name);
    if (recorded && recorded->estimable && subject->region_rows[contrast->name].empty()) {
      problems->push_back(path + ": no rows for contrast '" + contrast->name +
                          "', which summary.json marks estimable");
    }
  }
}

void ReadParticipants(const std::string& path, Participants* participants,
                      std::vector<std::string>* problems) {
  participants->path = path;
  Table table;
  try {
    table = ReadTable(path);
  } catch (const Error& error) {
    problems->push_back(error.what());
    return;
  }
  const int id_column = table.ColumnIndex("participant_id");
  if (id_column < 0) {
    problems->push_back(path + ":1: no 'participant_id' column");
    return;
  }
  for (int c = 0; c < static_cast<int>(table.header.size()); ++c) {
    const std::string& name = table.header[c];
    if (c == id_column) continue;
    if (name == "subject" || name.rfind("dof_", 0) == 0) {
      problems->push_back(path + ":1: column '" + name +
                          "' clashes with a column of pool-ready/subjects.tsv; rename it");
    }
    participants->columns.push_back(name);
  }
  for (int r = 0; r < static_cast<int>(table.rows.size()); ++r) {
    std::vector<std::string> cells = table.rows[r];
    const std::string key = SubjectKey(cells[id_column]);
    cells.erase(cells.begin() + id_column);
    if (!participants->cells.emplace(key, cells).second) {
      problems->push_back(table.CellLocation(r, id_column).ToString() + ": participant '" +
                          table.rows[r][id_column] + "' appears twice");
    }
  }
}

// Reads and checks every subject's outputs; throws one Error listing every problem.
GatherPlan PlanGather(const StudySpec& spec, const StudyOptions& options) {
  GatherPlan plan;
  plan.root = OutputRoot(spec, options);
  for (const ContrastSpec& contrast : spec.contrasts) {
    if (!contrast.is_f) plan.t_contrasts.push_back(&contrast);
  }
  const std::string fit_hint = "run `boldsum fit " + spec.config_path + "`";
  std::vector<std::string> problems, missing, stale;
  ChecksumCache checksums((fs::path(plan.root) / ".checksums.tsv").string());
  for (const SubjectSpec& spec_subject : spec.subjects) {
    SubjectInputs subject;
    subject.spec = &spec_subject;
    subject.folder = (fs::path(plan.root) / spec_subject.id).string();
    const std::string summary = subject.folder + "/summary.json";
    if (!fs::is_regular_file(summary)) {
      missing.push_back(spec_subject.id);
      continue;
    }
    try {
      subject.record = ReadRecordedSubject(summary);
    } catch (const Error& error) {
      problems.push_back(error.what());
      continue;
    }
    const std::string why = Staleness(spec, spec_subject, summary, &checksums, &subject.model_sha256);
    if (!why.empty()) {
      stale.push_back(spec_subject.id + " (" + why + ")");
      continue;
    }
    if (subject.record.id != spec_subject.id) {
      problems.push_back(summary + ": belongs to subject '" + subject.record.id + "', not '" +
                         spec_subject.id + "'");
    }
    for (const ContrastSpec* contrast : plan.t_contrasts) {
      const RecordedContrast* recorded = subject.record.Find(contrast->name);
      if (!recorded || recorded->is_f) {
        problems.push_back(summary + ": no t contrast '" + contrast->name + "'; " + fit_hint);
      }
    }
    plan.subjects.push_back(std::move(subject));
  }
  if (spec.subjects.empty()) problems.push_back("the config lists no subjects");
  if (!missing.empty()) {
    problems.push_back("no fitted results for " + Join(missing) + " under " + plan.root +
                       " (no summary.json); " + fit_hint + " first");
  }
  if (!stale.empty()) {
    problems.push_back("results out of date for " + Join(stale) + "; " + fit_hint + " first");
  }
  if (!plan.subjects.empty()) {
    const SubjectInputs& first = plan.subjects.front();
    plan.kind = first.record.kind;
    std::vector<std::string> other_kind;
    for (const SubjectInputs& subject : plan.subjects) {
      if (subject.record.kind != plan.kind) other_kind.push_back(subject.spec->id);
    }
    if (!other_kind.empty()) {
      const bool images = plan.kind == DataKind::kImage;
      problems.push_back("subjects " + Join(other_kind) + " have " +
                         (images ? "region tables" : "images") + " but the first subject '" +
                         first.spec->id + "' has " + (images ? "images" : "region tables") +
                         "; stacks need one kind of data for every subject");
    }
  }
  for (SubjectInputs& subject : plan.subjects) {
    if (subject.record.kind != plan.kind) continue;
    if (plan.kind == DataKind::kImage) {
      CheckImageFiles(plan.t_contrasts, &subject, &problems);
    } else {
      CheckRegionRows(plan.t_contrasts, &subject, &problems);
    }
  }
  if (plan.kind == DataKind::kImage && !plan.subjects.empty()) {
    const SubjectInputs& first = plan.subjects.front();
    std::vector<std::string> differing;
    for (const SubjectInputs& subject : plan.subjects) {
      const ImageGeometry& g = subject.mask_geometry;
      if (g.n_voxels() == 0 || first.mask_geometry.n_voxels() == 0) continue;
      if (!g.SameSpace(first.mask_geometry)) {
        differing.push_back(subject.spec->id + " (" + DescribeGrid(g) + ")");
      }
    }
    if (!differing.empty()) {
      problems.push_back("grid or affine differs from the first subject '" + first.spec->id +
                         "' (" + DescribeGrid(first.mask_geometry) + ") for " + Join(differing) +
                         "; stacks need every subject on one grid");
    }
  }
  if (!spec.participants_path.empty()) {
    ReadParticipants(spec.participants_path, &plan.participants, &problems);
  }
  if (!problems.empty()) {
    std::string message = "cannot gather the study:";
    for (const std::string& problem : problems) message += "\n  " + problem;
    throw Error(message + "\nnothing was written to " +
                (fs::path(plan.root) / kPoolReadyFolder).string());
  }
  return plan;
}

// The stacks are a function of the subjects' outputs, which their summary.json files
// identify (fingerprint and contrasts), the participants table, the stacked contrasts'
// names and the tool version. OUT/pool-ready/.sources holds this key on its first line;
// a gather whose key is unchanged has nothing to do. The lines after it, "stack <name>
// <key>", identify each contrast's pair of stacks alone (see StackKey), so that a gather
// after a contrast edit keeps the stacks of the contrasts that did not change.
constexpr const char* kSourcesFile = ".sources";
// The two stacks of a t contrast: <name><kind>.
constexpr const char* kStackKinds[] = {".estimate.nii.gz", ".variance.nii.gz"};

std::string SourcesKey(const StudySpec& spec, const GatherPlan& plan) {
  std::string key = std::string("boldsum ") + BOLDSUM_VERSION + "\n";
  for (const ContrastSpec* contrast : plan.t_contrasts) key += "contrast " + contrast->name + "\n";
  if (!spec.participants_path.empty()) {
    key += "participants " + FileSha256(spec.participants_path) + "\n";
  }
  for (const SubjectInputs& subject : plan.subjects) {
    key +=
        "subject " + subject.spec->id + " " + FileSha256(subject.folder + "/summary.json") + "\n";
  }
  return Sha256(key);
}

// A contrast's estimate and variance stacks are volume i = subject i's files of that
// contrast, which the subject's fit fingerprint and the contrast's outputs_key identify
// (equal keys mean byte-identical files; subject_outputs.h). "" when a subject's
// summary.json has no outputs_key (written by an older version): never reused.
std::string StackKey(const GatherPlan& plan, const ContrastSpec& contrast) {
  std::string key = std::string("boldsum ") + BOLDSUM_VERSION + "\nstack " + contrast.name + "\n";
  for (const SubjectInputs& subject : plan.subjects) {
    const RecordedContrast* recorded = subject.record.Find(contrast.name);
    if (recorded == nullptr || subject.model_sha256.empty()) return "";
    if (recorded->estimable && recorded->outputs_key.empty()) return "";
    key += subject.spec->id + " " + subject.model_sha256 + " " +
           (recorded->estimable ? recorded->outputs_key : std::string("not estimable")) + "\n";
  }
  return Sha256(key);
}

struct Sources {
  std::string key;
  std::map<std::string, std::string> stacks;  // contrast name -> StackKey
};

std::string SourcesText(const Sources& sources) {
  std::string text = sources.key + "\n";
  for (const auto& [name, key] : sources.stacks) {
    if (!key.empty()) text += "stack " + name + " " + key + "\n";
  }
  return text;
}

// The .sources of an earlier gather; empty when there is none or it cannot be read.
Sources ReadSources(const fs::path& folder) {
  Sources sources;
  std::string text;
  try {
    text = ReadFileBytes((folder / kSourcesFile).string());
  } catch (const Error&) {
    return sources;
  }
  std::istringstream lines(text);
  std::string line;
  if (!std::getline(lines, sources.key)) return Sources();
  while (std::getline(lines, line)) {
    std::istringstream fields(line);
    std::string word, name, key;
    if (fields >> word >> name >> key && word == "stack") sources.stacks[name] = key;
  }
  return sources;
}

// True when every file a gather writes is in the folder.
bool HasEveryFile(const GatherPlan& plan, const fs::path& folder) {
  std::vector<std::string> files = {kSourcesFile, "subjects.tsv"};
  if (plan.kind == DataKind::kImage) {
    files.push_back("mask.nii.gz");
    for (const ContrastSpec* contrast : plan.t_contrasts) {
      for (const char* kind : kStackKinds) files.push_back(contrast->name + kind);
    }
  } else {
    files.push_back("summaries.tsv");
  }
  std::error_code ec;
  for (const std::string& file : files) {
    if (!fs::is_regular_file(folder / file, ec)) return false;
  }
  return true;
}

void WriteSubjectsTable(const GatherPlan& plan, const OutputStage& stage, std::ostream* log) {
  std::string text = "subject";
  for (const ContrastSpec* contrast : plan.t_contrasts) text += "\tdof_" + contrast->name;
  for (const std::string& column : plan.participants.columns) text += "\t" + column;
  text += "\n";
  for (const SubjectInputs& subject : plan.subjects) {
    text += subject.spec->id;
    for (const ContrastSpec* contrast : plan.t_contrasts) {
      const RecordedContrast* recorded = subject.record.Find(contrast->name);
      const bool estimable = recorded && recorded->estimable;
      text += "\t" + (estimable ? recorded->dof_text : std::string("n/a"));
      if (!estimable && log) {
        *log << subject.spec->id << ": cannot estimate '" << contrast->name
             << "'; its entries are NaN (dof n/a)\n";
      }
    }
    if (!plan.participants.columns.empty()) {
      const auto row = plan.participants.cells.find(SubjectKey(subject.spec->id));
      if (row == plan.participants.cells.end() && log) {
        *log << subject.spec->id << ": no row in " << plan.participants.path
             << "; its participants columns are n/a\n";
      }
      for (size_t c = 0; c < plan.participants.columns.size(); ++c) {
        text += "\t" + (row == plan.participants.cells.end() ? "n/a" : row->second[c]);
      }
    }
    text += "\n";
  }
  WriteFileAtomically(stage.PathFor("subjects.tsv"), text);
}

// The intersection of the subjects' masks, then one 4D stack at a time (n x voxels floats).
// The mask and each t contrast's estimate and variance stacks. A contrast whose StackKey
// equals the one `before` records keeps the stacks in `old_folder` (hard links; see
// OutputStage::Adopt). `after` gets the new keys.
void WriteImageStacks(const GatherPlan& plan, const OutputStage& stage, const fs::path& old_folder,
                      const Sources& before, Sources* after, std::ostream* log) {
  ImageGeometry grid = plan.subjects.front().mask_geometry;
  const size_t voxels = static_cast<size_t>(grid.n_voxels());
  const auto read_volume = [&](const std::string& path) {
    ImageGeometry geometry;
    std::vector<float> values = ReadVolume(path, &geometry);
    if (!geometry.SameSpace(grid) || values.size() != voxels) {
      throw Error(path + ": grid changed while gathering; nothing was written");
    }
    return values;
  };
  std::vector<float> mask(voxels, 1.0f);
  for (const SubjectInputs& subject : plan.subjects) {
    const std::vector<float> own = read_volume(subject.folder + "/mask.nii.gz");
    for (size_t v = 0; v < voxels; ++v) {
      if (!(std::isfinite(own[v]) && own[v] != 0.0f)) mask[v] = 0.0f;
    }
  }
  size_t inside = 0;
  for (float value : mask) inside += value != 0.0f;
  if (inside == 0 && log) *log << "warning: the subjects' masks have no voxel in common\n";
  grid.n_volumes = 1;
  WriteImage(stage.PathFor("mask.nii.gz"), grid, mask);

  const int n = static_cast<int>(plan.subjects.size());
  ImageGeometry stack_grid = grid;
  stack_grid.n_volumes = n;
  stack_grid.tr_s = 0.0;  // volumes are subjects, not time points
  std::vector<std::string> kept;
  for (const ContrastSpec* contrast : plan.t_contrasts) {
    const std::string key = StackKey(plan, *contrast);
    after->stacks[contrast->name] = key;
    const auto earlier = before.stacks.find(contrast->name);
    if (!key.empty() && earlier != before.stacks.end() && earlier->second == key) {
      std::error_code ec;
      const auto there = [&](const char* kind) {
        return fs::is_regular_file(old_folder / (contrast->name + kind), ec);
      };
      if (std::all_of(std::begin(kStackKinds), std::end(kStackKinds), there)) {
        for (const char* kind : kStackKinds) {
          stage.Adopt(contrast->name + kind, (old_folder / (contrast->name + kind)).string());
        }
        kept.push_back(contrast->name);
        continue;
      }
    }
    for (const char* kind : kStackKinds) {
      std::vector<float> stack(voxels * static_cast<size_t>(n), kNaN);
      for (size_t i = 0; i < plan.subjects.size(); ++i) {
        const SubjectInputs& subject = plan.subjects[i];
        const RecordedContrast* recorded = subject.record.Find(contrast->name);
        if (!recorded || !recorded->estimable) continue;
        const std::vector<float> volume = read_volume(subject.folder + "/" + contrast->name + kind);
        std::copy(volume.begin(), volume.end(), stack.begin() + static_cast<long>(i * voxels));
      }
      WriteImage(stage.PathFor(contrast->name + kind), stack_grid, stack, n);
    }
  }
  if (log && !kept.empty()) {
    *log << "stacks of " << Join(kept) << " unchanged since the last gather, kept\n";
  }
}

// Long form: one row per subject, t contrast and region; n/a rows for a contrast the
// subject cannot estimate (one per region of its summary.json).
void WriteRegionSummaries(const GatherPlan& plan, const OutputStage& stage) {
  std::string text = "subject\tcontrast\tregion\testimate\tvariance\tdof\n";
  for (const SubjectInputs& subject : plan.subjects) {
    for (const ContrastSpec* contrast : plan.t_contrasts) {
      const auto rows = subject.region_rows.find(contrast->name);
      const std::string prefix = subject.spec->id + "\t" + contrast->name + "\t";
      if (rows == subject.region_rows.end()) {
        for (const std::string& region : subject.record.regions) {
          text += prefix + region + "\tn/a\tn/a\tn/a\n";
        }
        continue;
      }
      for (const std::vector<std::string>& cells : rows->second) {
        text += prefix + cells[0] + "\t" + cells[1] + "\t" + cells[2] + "\t" + cells[3] + "\n";
      }
    }
  }
  WriteFileAtomically(stage.PathFor("summaries.tsv"), text);
}

}  // namespace

void GatherStudy(const StudySpec& spec, const StudyOptions& options, std::ostream& log) {
  const GatherPlan plan = PlanGather(spec, options);
  std::ostream* out = options.quiet ? nullptr : &log;
  const fs::path folder = fs::path(plan.root) / kPoolReadyFolder;
  const std::string key = SourcesKey(spec, plan);
  const Sources before = ReadSources(folder);
  if (before.key == key && HasEveryFile(plan, folder)) {
    if (out) *out << folder.string() << ": up to date, not gathered again\n";
    return;
  }
  Sources after;
  after.key = key;
  OutputStage stage(plan.root, kPoolReadyFolder);
  WriteSubjectsTable(plan, stage, out);
  if (plan.kind == DataKind::kImage) {
    WriteImageStacks(plan, stage, folder, before, &after, out);
  } else {
    WriteRegionSummaries(plan, stage);
  }
  WriteFileAtomically(stage.PathFor(kSourcesFile), SourcesText(after));
  stage.Commit();
  if (!out) return;
  std::vector<std::string> f_names;
  for (const ContrastSpec& contrast : spec.contrasts) {
    if (contrast.is_f) f_names.push_back(contrast.name);
  }
  log << "gathered " << plan.subjects.size() << " subject(s), " << plan.t_contrasts.size()
      << " t contrast(s) into " << (fs::path(plan.root) / kPoolReadyFolder).string() << "\n";
  if (!f_names.empty()) {
    log << "F contrasts are not stacked (" << Join(f_names)
        << "); their maps stay in each subject's folder\n";
  }
}

}  // namespace boldsum
