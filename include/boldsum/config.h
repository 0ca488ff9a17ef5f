// A study as the config file describes it, after validation. Produced by LoadConfig;
// read by every later stage. All paths are absolute (resolved against the config's
// folder); all times are in seconds.
#pragma once

#include <map>
#include <optional>
#include <string>
#include <vector>

#include "boldsum/error.h"

namespace boldsum {

// One event: a boxcar of height `amplitude` from onset to onset + duration. A zero
// duration means an impulse of unit area (times amplitude).
struct Event {
  double onset_s = 0.0;
  double duration_s = 0.0;
  double amplitude = 1.0;
};

// Events of one run, by condition name. Conditions of the study with no events in the
// run are present with an empty list.
using EventsByCondition = std::map<std::string, std::vector<Event>>;

enum class HrfShape { kDoubleGamma, kGlover, kFir };
enum class HrfDerivatives { kNone, kTime, kTimeDispersion };

struct HrfSpec {
  HrfShape shape = HrfShape::kDoubleGamma;
  HrfDerivatives derivatives = HrfDerivatives::kNone;  // not allowed with kFir
  double fir_bin_s = 0.0;  // FIR bin width; 0 means one TR
  int fir_bins = 0;        // FIR bins after onset; 0 means enough to cover 24 s
};

enum class DriftKind { kCosine, kPolynomial, kNone };

struct DriftSpec {
  DriftKind kind = DriftKind::kCosine;
  double cutoff_s = 128.0;  // cosine: periods longer than this are modelled
  int degree = 2;           // polynomial: Legendre degrees 1..degree (0 is the intercept)
};

enum class NoiseModel { kAr1, kNone };

// Volumes whose confound `column` exceeds `above` get an indicator column each.
struct CensorSpec {
  std::string column;
  double above = 0.0;
};

// The part of the study that decides every run's design matrix.
struct ModelSpec {
  double tr_s = 0.0;
  double slice_reference = 0.5;  // volume k is modelled at (k + slice_reference) * tr_s
  HrfSpec hrf;
  DriftSpec drift;
  NoiseModel noise = NoiseModel::kAr1;
  std::vector<std::string> conditions;  // in design-column order
  std::vector<std::string> ignored;     // trial types in events files that are dropped
  std::vector<std::string> confounds;   // confound TSV column names, in column order
  std::optional<CensorSpec> censor;
};

// A t contrast has one row; an F contrast one row per mapping. Keys name a condition
// (weight on its main regressor; FIR: spread evenly over its bins) or a design column.
struct ContrastSpec {
  std::string name;  // matches [A-Za-z0-9_-]+; used in file names
  std::vector<std::map<std::string, double>> rows;
  bool is_f = false;
  SourceLocation where;
};

struct RunSpec {
  std::string data_path;       // NIfTI image (.nii / .nii.gz) or ROI table (.tsv)
  std::string events_path;     // "" when events were given inline
  std::string confounds_path;  // "" when the run has no confounds file
  EventsByCondition events;    // loaded and validated
  SourceLocation where;        // the run's entry in the config
};

struct SubjectSpec {
  std::string id;
  std::vector<RunSpec> runs;
  SourceLocation where;
};

struct StudySpec {
  std::string config_path;  // absolute
  std::string config_dir;   // absolute; base for relative paths
  ModelSpec model;
  std::vector<ContrastSpec> contrasts;
  std::string mask_path;  // "" means the automatic mask
  // Absolute path of the `participants` table (participant_id plus columns copied into
  // OUT/pool-ready/subjects.tsv); "" when not given.
  std::string participants_path;
  std::vector<SubjectSpec> subjects;
  std::string output_dir;  // absolute; default <config_dir>/results
  // Only when the subjects were found in a BIDS dataset (subjects_from): the line
  // "found N subjects, M runs (task ...) in <folder>", then one "skipped <what>: <why>"
  // line per bold image or subject left out. Empty when the subjects are listed.
  std::vector<std::string> discovery_report;
};

struct LoadedConfig {
  StudySpec spec;           // meaningful only when !diagnostics.HasErrors()
  Diagnostics diagnostics;  // every error and warning found, in file order
};

// Reads and validates a config file and everything it names that can be checked
// without the imaging data (events tables, confounds headers, file existence).
// Never throws for problems in the inputs: they all go to diagnostics.
LoadedConfig LoadConfig(const std::string& path);

}  // namespace boldsum
