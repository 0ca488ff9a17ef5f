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
};

// Reads every run's data header, builds its design, writes
// OUT/<subject>/run-<k>/design.tsv and design.svg, and prints per run the rank,
// condition number, correlations, variance inflation and contrast efficiencies.
// Returns true when every model is usable; otherwise prints the reasons.
bool CheckStudy(const StudySpec& spec, const StudyOptions& options, std::ostream& log);

// Fits every selected subject (see DESIGN.md for the statistics) and writes its
// outputs under OUT/<subject>/, replacing earlier results only when the subject
// completed. Throws Error on the first subject that cannot be fitted; subjects
// finished before it keep their new outputs.
void FitStudy(const StudySpec& spec, const StudyOptions& options, std::ostream& log);

// Prints a table of true versus estimated known_vs_new effects in the demo's regions,
// from a fitted demo study folder. Throws Error if the fit outputs are missing.
void PrintDemoComparison(const std::string& dir, std::ostream& out);

}  // namespace boldsum
