// Finding a task's runs in a BIDS dataset: the bold images, their events tables, their
// confounds tables and the RepetitionTime that applies to each. Reads folders and JSON
// sidecars only; the events tables are validated by the caller.
#pragma once

#include <optional>
#include <string>
#include <vector>

#include "config/bids_tree.h"
#include "config/reader.h"

namespace boldsum::config {

struct BidsQuery {
  TreeRoot dataset;    // the raw dataset: events tables and raw sidecars
  TreeRoot bold_root;  // where the bold images are: the dataset or a derivatives folder
  std::string task;    // label, required
  std::string session, space, desc;  // labels; "" accepts any
  std::string confounds_pattern;     // "" for none; see ExpandConfoundsPattern
  bool confounds_required = false;   // a run without a confounds table is skipped
};

struct FoundRun {
  ResolvedPath bold;
  ResolvedPath events;
  ResolvedPath confounds;  // both "" when there is none
  std::optional<SidecarTr> sidecar_tr;
};

struct FoundSubject {
  std::string id;              // the folder name, "sub-<label>"
  std::vector<FoundRun> runs;  // by session, then run entity, then file name
};

struct BidsDiscovery {
  std::vector<FoundSubject> subjects;  // those with at least one run, by label
  int run_count = 0;
  // "found N subjects, M runs ..." then one "skipped <what>: <why>" per item left out.
  std::vector<std::string> report;
  std::vector<DatasetProblem> problems;  // each stops the study
};

// Bold images are `sub-<label>/[ses-<label>/]func/*_bold.nii[.gz]` under bold_root
// whose sub-/ses- entities match their folders; those of query.task that pass the
// session/space/desc filters are runs. A run's events table is the nearest applicable
// `*_events.tsv` in the raw dataset (same folders, derivative entities space, res, den
// and desc dropped from the name); a run without one is skipped.
BidsDiscovery DiscoverBids(const BidsQuery& query);

// The placeholder names a confounds pattern may use, in braces.
const std::vector<std::string>& ConfoundsPlaceholders();
// "" when every "{...}" in `pattern` is a known placeholder, else the first unknown one
// (with its braces), or "{" for an unclosed brace.
std::string UnknownPlaceholder(const std::string& pattern);
// {stem}: the bold name without the derivative entities and the suffix
// ("sub-01_ses-02_task-melodies_run-1"); {subject}: "sub-01"; {session}: "ses-02", or ""
// when the name has no session.
std::string ExpandConfoundsPattern(const std::string& pattern, const BidsName& bold);

}  // namespace boldsum::config
