// Whole-study operations behind the CLI commands: check (designs only), fit (first
// level, runs combined per subject), and the demo study. Each validates everything it
// needs before writing anything.
#pragma once

#include <iosfwd>
#include <string>
#include <vector>

#include "boldsum/config.h"

namespace boldsum {

struct StudyOptions {
  std::vector<std::string> subjects;  // ids to process; empty means all
  std::string output_dir;             // overrides the config's `output` when not ""
  int threads = 0;                    // 0 means one per hardware thread
  bool force = false;                 // fit: refit every subject, ignoring saved results
  bool live_progress = false;         // fit: a live progress line (for a terminal)
  bool quiet = false;                 // fit: no progress or log lines
  double memory_gb = 0;               // fit: budget for concurrent subjects; 0 = half of RAM
};

// Reads every run's data header, builds its design, writes
// OUT/<subject>/run-<k>/design.tsv and design.svg, and prints per run the rank,
// condition number, correlations, variance inflation and contrast efficiencies.
// Returns true when every model is usable; otherwise prints the reasons.
bool CheckStudy(const StudySpec& spec, const StudyOptions& options, std::ostream& log);

// Brings every selected subject up to date (see DESIGN.md for the statistics): a subject
// whose recorded fingerprint matches is skipped; one whose only change is in the
// contrasts has them recomputed from its saved fit without reading the data; any
// other is refitted (all of them with options.force). Subjects run concurrently under
// the memory budget, each with a share of the threads; the results do not depend on
// either. Outputs go to OUT/<subject>/, replaced only when the subject completed.
// Throws Error on the first subject that fails, or when interrupted (Ctrl-C); subjects
// finished before keep their new outputs. Returns how many subjects were brought up to
// date (0: every selected subject was already up to date).
int FitStudy(const StudySpec& spec, const StudyOptions& options, std::ostream& log);

// Where a subject's saved results stand against the config and its inputs.
struct SubjectStatus {
  enum class State {
    kUpToDate,          // the recorded fingerprint matches
    kContrastsChanged,  // only the contrasts differ; the saved fit is still valid
    kStale,             // inputs or model settings changed (or the saved fit is missing)
    kMissing,           // no readable results
  };
  std::string id;
  State state = State::kMissing;
  std::string reason;  // as `status` prints it: "up to date", "stale: ...", "missing ..."
};

// The status of every selected subject, in config order (refreshes OUT/.checksums.tsv
// when OUT exists).
std::vector<SubjectStatus> StudyStatus(const StudySpec& spec, const StudyOptions& options);

// Lists every selected subject as up to date, stale (and why) or missing. Returns the
// number of subjects that are not up to date.
int PrintStudyStatus(const StudySpec& spec, const StudyOptions& options, std::ostream& out);

// Writes OUT/pool-ready/ (README "Pool-ready stacks") from every subject of the config,
// in config order (options.subjects is ignored: the stacks describe the whole study).
// Images: per t contrast 4D float32 <contrast>.estimate.nii.gz and .variance.nii.gz
// (volume i = row i of subjects.tsv, NaN where subject i has no value or cannot estimate
// the contrast), the intersection mask.nii.gz; region tables: summaries.tsv in long form.
// Both: subjects.tsv (subject, dof_<contrast>, then the participants table's columns).
// F contrasts are not stacked. Every subject must have up-to-date fit outputs, all of one
// kind and (images) on one grid and orientation; otherwise throws Error naming every
// offending subject and writes nothing. An earlier pool-ready/ is replaced only whole.
// Prints a note per subject that cannot estimate a contrast unless options.quiet.
void GatherStudy(const StudySpec& spec, const StudyOptions& options, std::ostream& log);

// Ctrl-C (SIGINT) and SIGTERM set a flag that running fits poll: the subject in progress
// is abandoned without partial files, finished subjects keep their outputs.
void InstallInterruptHandler();
bool IsInterrupted();

// Prints a table of true versus estimated known_vs_new effects in the demo's regions,
// from a fitted demo study folder. Throws Error if the fit outputs are missing.
void PrintDemoComparison(const std::string& dir, std::ostream& out);

}  // namespace boldsum
