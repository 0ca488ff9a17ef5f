// The subjects_from section: where the BIDS dataset is, which runs to take, and the
// validation of what was found (events tables, confounds headers, sidecar TRs).
#include <cmath>
#include <filesystem>
#include <set>
#include <sstream>
#include <system_error>

#include "config/bids_discovery.h"
#include "config/events_loader.h"
#include "config/readers.h"

namespace boldsum::config {

namespace fs = std::filesystem;

namespace {

constexpr double kTrTolerance = 0.01;  // same rule as the image header's TR

const Field* Find(const std::map<std::string, Field>& fields, const std::string& name) {
  const auto it = fields.find(name);
  return it == fields.end() ? nullptr : &it->second;
}

std::optional<TreeRoot> ReadFolder(YamlReader& reader, const Field& field,
                                   const std::string& what) {
  const std::optional<std::string> text = reader.Text(field, what);
  if (!text) return std::nullopt;
  const ResolvedPath path = reader.Resolve(*text);
  std::error_code error;
  const fs::file_status status = fs::status(path.absolute, error);
  if (!fs::exists(status)) {
    reader.Error(field, "folder '" + *text + "' not found (looked for " + path.absolute + ")");
    return std::nullopt;
  }
  if (!fs::is_directory(status)) {
    reader.Error(field, "'" + *text + "' is a file; expected " + what);
    return std::nullopt;
  }
  return TreeRoot{path.absolute, path.shown};
}

// A BIDS label, given bare ("01") or with its entity prefix ("ses-01").
std::optional<std::string> ReadLabel(YamlReader& reader, const Field& field,
                                     const std::string& key) {
  std::optional<std::string> text = reader.Text(field, "a BIDS " + key + " label");
  if (!text) return std::nullopt;
  if (text->rfind(key + "-", 0) == 0) text = text->substr(key.size() + 1);
  if (!IsBidsLabel(*text)) {
    reader.Error(field, "'" + field.value.Scalar() +
                            "' is not a BIDS label (letters and digits only, as in " + key +
                            "-<label> of the file names)");
    return std::nullopt;
  }
  return text;
}

std::string Seconds(double value) {
  std::ostringstream text;
  text << value;
  return text.str();
}

std::string FileName(const std::string& path) { return fs::path(path).filename().string(); }

}  // namespace

std::vector<SubjectSpec> ReadSubjectsFrom(YamlReader& reader, const Field& field,
                                          const ModelSpec& model, const ModelState& state,
                                          std::vector<std::string>* report) {
  const auto fields = reader.Fields(field, SubjectsFromKeys());
  if (!fields) return {};
  const int errors_before = reader.reporter().ErrorCount();
  BidsQuery query;
  std::optional<TreeRoot> dataset, derivatives;
  if (const Field* f = Find(*fields, "bids"))
    dataset = ReadFolder(reader, *f, "a BIDS dataset folder");
  if (const Field* f = Find(*fields, "derivatives")) {
    derivatives = ReadFolder(reader, *f, "a folder of preprocessed bold images");
  }
  const std::vector<std::pair<std::string, std::string*>> labels = {{"task", &query.task},
                                                                    {"session", &query.session},
                                                                    {"space", &query.space},
                                                                    {"desc", &query.desc}};
  for (const auto& [key, target] : labels) {
    const Field* f = Find(*fields, key);
    if (!f) continue;
    if (auto label = ReadLabel(reader, *f, key == "session" ? "ses" : key)) *target = *label;
  }
  const std::string needs = NeedsConfounds(model);
  query.confounds_required = !needs.empty();
  if (const Field* f = Find(*fields, "confounds")) {
    if (auto pattern = reader.Text(*f, "a file name pattern such as {stem}_confounds.tsv")) {
      const std::string unknown = UnknownPlaceholder(*pattern);
      std::string known;
      for (const std::string& name : ConfoundsPlaceholders()) {
        known += (known.empty() ? "{" : ", {") + name + "}";
      }
      if (unknown == "{") {
        reader.Error(*f, "'" + *pattern + "' has a '{' without its '}'");
      } else if (!unknown.empty()) {
        reader.Error(*f,
                     "unknown placeholder " + unknown + " in '" + *pattern + "'; known: " + known);
      } else {
        query.confounds_pattern = *pattern;
      }
    }
  } else if (query.confounds_required) {
    reader.Error(field,
                 "no confounds pattern, but the model needs a confounds table per run "
                 "for " +
                     needs);
  }
  if (!dataset || reader.reporter().ErrorCount() != errors_before) return {};
  query.dataset = *dataset;
  query.bold_root = derivatives ? *derivatives : *dataset;

  const BidsDiscovery found = DiscoverBids(query);
  *report = found.report;
  Reporter& reporter = reader.reporter();
  const SourceLocation anchor = reader.At(field);
  for (const DatasetProblem& problem : found.problems) {
    reporter.Add(Severity::kError, problem.where, problem.message, anchor);
  }
  if (found.subjects.empty()) {
    reader.Error(field, "found no usable runs of task " + query.task + " in " +
                            query.bold_root.shown.string());
    for (std::size_t i = 1; i < found.report.size(); ++i) {
      reader.Warning(anchor, Prefixed(field.path, found.report[i]));
    }
    return {};
  }

  // Each events table, confounds table and sidecar is checked once, however many runs
  // share it (BIDS inheritance).
  std::map<std::string, std::optional<EventsByCondition>> events_by_path;
  std::set<std::string> checked_confounds;
  std::map<std::string, std::pair<SidecarTr, std::vector<std::string>>> wrong_tr;  // by place
  std::vector<SubjectSpec> subjects;
  for (const FoundSubject& found_subject : found.subjects) {
    SubjectSpec subject;
    subject.id = found_subject.id;
    subject.where = SourceLocation{(query.bold_root.shown / subject.id).string(), 0, 0};
    for (const FoundRun& found_run : found_subject.runs) {
      auto events = events_by_path.find(found_run.events.absolute);
      if (events == events_by_path.end()) {
        std::optional<EventsByCondition> loaded =
            LoadEventsTable(reader, found_run.events, anchor, model, state.has_conditions);
        for (const std::string& condition : model.conditions) {
          if (loaded && (*loaded)[condition].empty()) {
            reporter.Add(Severity::kWarning, SourceLocation{found_run.events.shown, 0, 0},
                         "no events for condition '" + condition + "' in this table", anchor);
          }
        }
        events = events_by_path.emplace(found_run.events.absolute, loaded).first;
      }
      if (!found_run.confounds.absolute.empty() && query.confounds_required &&
          checked_confounds.insert(found_run.confounds.absolute).second) {
        CheckConfoundsHeader(reader, found_run.confounds, anchor, model);
      }
      if (found_run.sidecar_tr && state.has_tr &&
          std::abs(found_run.sidecar_tr->seconds - model.tr_s) > kTrTolerance * model.tr_s) {
        auto& entry = wrong_tr[found_run.sidecar_tr->where.ToString()];
        entry.first = *found_run.sidecar_tr;
        entry.second.push_back(FileName(found_run.bold.shown));
      }
      if (!events->second) continue;
      RunSpec run;
      run.data_path = found_run.bold.absolute;
      run.events_path = found_run.events.absolute;
      run.confounds_path = found_run.confounds.absolute;
      run.events = *events->second;
      run.where = SourceLocation{found_run.bold.shown, 0, 0};
      subject.runs.push_back(run);
    }
    subjects.push_back(subject);
  }
  for (const auto& [place, entry] : wrong_tr) {
    const std::vector<std::string>& runs = entry.second;
    const std::size_t others = runs.size() - 1;
    reporter.Add(Severity::kError, entry.first.where,
                 "RepetitionTime is " + Seconds(entry.first.seconds) +
                     " s but the config's tr is " + Seconds(model.tr_s) +
                     " s (they may differ by at most 1%); it applies to " + runs.front() +
                     (others == 0 ? ""
                                  : " and " + std::to_string(others) + " other run" +
                                        (others == 1 ? "" : "s")),
                 anchor);
  }
  return subjects;
}

}  // namespace boldsum::config
