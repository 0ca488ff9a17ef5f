// LoadConfig: parse the YAML text, then read each section through the located readers.
// Every problem becomes a diagnostic; nothing is written to disk.
#include <filesystem>

#include "boldsum/config.h"
#include "boldsum/io.h"
#include "config/participants_reader.h"
#include "config/readers.h"

namespace boldsum {

namespace fs = std::filesystem;
using config::Field;

namespace {

constexpr long long kConfigVersion = 1;

// `participants` (checked against the subjects read before it), and the subject ids
// that would collide with the study-level output folders.
void ReadParticipantsAndReserved(config::YamlReader& reader, const Field* participants,
                                 StudySpec* spec) {
  for (const SubjectSpec& subject : spec->subjects) {
    if (subject.id == "pool-ready") {
      reader.Error(subject.where, "subject id 'pool-ready' is reserved: OUT/pool-ready/ holds "
                                  "the study's stacked results");
    }
    if (subject.id == "report") {
      reader.Error(subject.where, "subject id 'report' is reserved: OUT/report/ holds the "
                                  "study's HTML report");
    }
  }
  if (!participants) return;
  if (auto path = reader.ExistingFile(*participants, "a path to a participants table")) {
    spec->participants_path = path->absolute;
    config::CheckParticipants(reader, *path, reader.At(*participants), spec->subjects);
  }
}

void ReadStudy(config::YamlReader& reader, const YAML::Node& document, StudySpec* spec) {
  const Field root{"", YAML::Node(), document};
  const auto top = reader.Fields(root, config::TopKeys());
  if (!top) return;
  if (top->count("subjects") == 0 && top->count("subjects_from") == 0) {
    reader.Error(reader.At(document),
                 "missing required key 'subjects' (or 'subjects_from' to find the subjects in "
                 "a BIDS dataset)");
  }
  auto find = [&](const char* name) -> const Field* {
    const auto it = top->find(name);
    return it == top->end() ? nullptr : &it->second;
  };
  if (const Field* f = find("version")) {
    const auto version = reader.Integer(*f, "a whole number");
    if (version && *version != kConfigVersion) {
      reader.Error(*f, "unsupported version " + f->value.Scalar() +
                           "; this boldsum reads version " + std::to_string(kConfigVersion));
    }
  }
  const config::ModelState state = config::ReadModel(reader, *top, &spec->model);
  if (const Field* f = find("mask")) {
    if (auto path = reader.ExistingFile(*f, "a path to a mask image")) {
      spec->mask_path = path->absolute;
    }
  }
  spec->output_dir = reader.Resolve("results").absolute;
  if (const Field* f = find("output")) {
    if (auto text = reader.Text(*f, "a folder path"))
      spec->output_dir = reader.Resolve(*text).absolute;
  }
  if (const Field* f = find("contrasts")) {
    spec->contrasts = config::ReadContrasts(reader, *f, spec->model, state);
  }
  const Field* listed = find("subjects");
  const Field* found = find("subjects_from");
  if (listed && found) {
    reader.Error(reader.At(found->key),
                 "subjects_from: give either subjects or subjects_from, not both (subjects at "
                 "line " + std::to_string(reader.At(listed->key).line) + ")");
  } else if (listed) {
    spec->subjects = config::ReadSubjects(reader, *listed, spec->model, state);
  } else if (found) {
    spec->subjects = config::ReadSubjectsFrom(reader, *found, spec->model, state,
                                              &spec->discovery_report);
  }
  ReadParticipantsAndReserved(reader, find("participants"), spec);
}

}  // namespace

LoadedConfig LoadConfig(const std::string& path) {
  LoadedConfig loaded;
  config::Reporter reporter;
  const fs::path absolute = fs::absolute(fs::path(path)).lexically_normal();
  loaded.spec.config_path = absolute.string();
  loaded.spec.config_dir = absolute.parent_path().string();
  config::YamlReader reader(path, loaded.spec.config_dir, &reporter);

  std::string text;
  try {
    text = ReadFileBytes(path);
  } catch (const Error&) {
    reader.Error(SourceLocation{path, 0, 0}, "cannot read the config file");
    loaded.diagnostics = reporter.Sorted();
    return loaded;
  }
  try {
    const YAML::Node document = YAML::Load(text);
    if (!document.IsDefined() || document.IsNull()) {
      reader.Error(SourceLocation{path, 0, 0},
                   "the config is empty; it needs at least tr, conditions and subjects");
    } else {
      ReadStudy(reader, document, &loaded.spec);
    }
  } catch (const YAML::Exception& error) {
    // Syntax errors, and any conversion yaml-cpp rejects that the readers did not catch.
    const SourceLocation where{path, error.mark.line + 1, error.mark.column + 1};
    reader.Error(where, "YAML syntax error: " + error.msg);
  }
  loaded.diagnostics = reporter.Sorted();
  return loaded;
}

}  // namespace boldsum
