// The subjects section: ids, runs, the files each run names, their events and the
// header of their confounds tables.
#include <algorithm>
#include <optional>

#include "boldsum/io.h"
#include "config/events_loader.h"
#include "config/readers.h"

namespace boldsum::config {
namespace {

bool IsFileNameSafe(const std::string& name) {
  return std::all_of(name.begin(), name.end(), [](char c) {
    return (c >= 'A' && c <= 'Z') || (c >= 'a' && c <= 'z') || (c >= '0' && c <= '9') || c == '_' ||
           c == '-';
  });
}

bool EndsWith(const std::string& text, const std::string& suffix) {
  return text.size() >= suffix.size() &&
         text.compare(text.size() - suffix.size(), suffix.size(), suffix) == 0;
}

std::optional<RunSpec> ReadRun(YamlReader& reader, const Field& field, const ModelSpec& model,
                               const ModelState& state) {
  const auto fields = reader.Fields(field, RunKeys());
  if (!fields) return std::nullopt;
  RunSpec run;
  run.where = reader.At(field.value);
  const int errors_before = reader.reporter().ErrorCount();
  auto find = [&](const char* name) -> const Field* {
    const auto it = fields->find(name);
    return it == fields->end() ? nullptr : &it->second;
  };
  if (const Field* f = find("data")) {
    const auto text = reader.Text(*f, "a path to a NIfTI image or an ROI table");
    if (text && !EndsWith(*text, ".nii") && !EndsWith(*text, ".nii.gz") &&
        !EndsWith(*text, ".tsv")) {
      reader.Error(
          *f, "'" + *text + "' is neither a NIfTI image (.nii, .nii.gz) nor an ROI table (.tsv)");
    } else if (text) {
      if (auto path = reader.ExistingFile(*f, "a path")) run.data_path = path->absolute;
    }
  }
  if (const Field* f = find("events")) {
    std::optional<EventsByCondition> events;
    if (f->value.IsMap()) {
      events = ReadInlineEvents(reader, *f, model, state.has_conditions);
    } else if (f->value.IsScalar()) {
      if (auto path = reader.ExistingFile(*f, "a path to an events table")) {
        run.events_path = path->absolute;
        events = LoadEventsTable(reader, *path, reader.At(*f), model, state.has_conditions);
      }
    } else {
      reader.ReportWrongType(*f,
                             "a path to an events table or a mapping of trial types to "
                             "events");
    }
    if (events) {
      run.events = *events;
      for (const std::string& condition : model.conditions) {
        if (run.events[condition].empty()) {
          reader.Warning(reader.At(f->key), Prefixed(f->path, "no events for condition '" +
                                                                  condition + "' in this run"));
        }
      }
    }
  }
  const bool needs_confounds = !model.confounds.empty() || model.censor.has_value();
  if (const Field* f = find("confounds")) {
    if (auto path = reader.ExistingFile(*f, "a path to a confounds table")) {
      run.confounds_path = path->absolute;
      if (needs_confounds) CheckConfoundsHeader(reader, *path, reader.At(*f), model);
    }
  } else if (needs_confounds) {
    reader.Error(run.where, Prefixed(field.path, "no confounds file, but the model needs one for " +
                                                     NeedsConfounds(model)));
  }
  if (reader.reporter().ErrorCount() != errors_before) {
    return std::nullopt;
  }
  return run;
}

}  // namespace

// The confounds table must have every column the model takes from it.
void CheckConfoundsHeader(YamlReader& reader, const ResolvedPath& path,
                          const SourceLocation& anchor, const ModelSpec& model) {
  Reporter& reporter = reader.reporter();
  const std::optional<Table> read = reader.ReadTableAt(path, anchor);
  if (!read) return;
  const Table& table = *read;
  std::vector<std::pair<std::string, std::string>> needed;  // column, where it is named
  for (const std::string& name : model.confounds) needed.emplace_back(name, "confounds");
  if (model.censor) needed.emplace_back(model.censor->column, "censor.column");
  for (const auto& [column, source] : needed) {
    if (table.ColumnIndex(column) >= 0) continue;
    // Suggest only columns the model does not already take.
    std::vector<std::string> unused;
    for (const std::string& name : table.header) {
      const bool taken = std::any_of(needed.begin(), needed.end(),
                                     [&](const auto& need) { return need.first == name; });
      if (!taken) unused.push_back(name);
    }
    const std::string near = ClosestMatch(column, unused);
    reporter.Add(Severity::kError, SourceLocation{table.path, 1, 0},
                 "column '" + column + "' (from " + source + ") is not in the header" +
                     (near.empty() ? "" : " (did you mean '" + near + "'?)"),
                 anchor);
  }
}

std::string NeedsConfounds(const ModelSpec& model) {
  std::string needs;
  if (!model.confounds.empty()) needs = "confounds (" + JoinNames(model.confounds) + ")";
  if (model.censor) {
    needs +=
        (needs.empty() ? "" : " and ") + std::string("censoring (") + model.censor->column + ")";
  }
  return needs;
}

std::vector<SubjectSpec> ReadSubjects(YamlReader& reader, const Field& field,
                                      const ModelSpec& model, const ModelState& state) {
  std::vector<SubjectSpec> subjects;
  const auto items = reader.Items(field, "a list of subjects ({id, runs})");
  if (!items) return subjects;
  if (items->empty()) reader.Error(field, "must list at least one subject");
  std::map<std::string, int> first_line;
  for (const Field& item : *items) {
    const auto fields = reader.Fields(item, SubjectKeys());
    if (!fields) continue;
    SubjectSpec subject;
    subject.where = reader.At(item.value);
    if (fields->count("id") != 0) {
      const Field& id_field = fields->at("id");
      if (auto id = reader.Text(id_field, "a subject id")) {
        if (!IsFileNameSafe(*id)) {
          reader.Error(id_field, "'" + *id +
                                     "' may contain only letters, digits, '_' and '-' "
                                     "(it names the subject's output folder)");
        }
        const auto [first, inserted] = first_line.emplace(*id, reader.At(id_field).line);
        if (!inserted) {
          reader.Error(id_field, "duplicate subject id '" + *id + "' (first at line " +
                                     std::to_string(first->second) + ")");
        }
        subject.id = *id;
      }
    }
    if (fields->count("runs") != 0) {
      const Field& runs_field = fields->at("runs");
      if (auto runs = reader.Items(runs_field, "a list of runs ({data, events, confounds})")) {
        if (runs->empty()) reader.Error(runs_field, "must list at least one run");
        for (const Field& run_field : *runs) {
          if (auto run = ReadRun(reader, run_field, model, state)) subject.runs.push_back(*run);
        }
      }
    }
    subjects.push_back(subject);
  }
  return subjects;
}

}  // namespace boldsum::config
