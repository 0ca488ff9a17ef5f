// What the study stages know about a subject before reading any data values: each
// run's kind, size and design matrix.
#pragma once

#include <string>
#include <vector>

#include "boldsum/config.h"
#include "boldsum/design.h"
#include "boldsum/error.h"
#include "boldsum/io.h"
#include "boldsum/study.h"

namespace boldsum {

enum class DataKind { kImage, kRegions };

struct RunPlan {
  int index = 0;                // 1-based, config order; outputs go to run-<index>/
  const RunSpec* spec = nullptr;
  DataKind kind = DataKind::kImage;
  int n_volumes = 0;
  ImageGeometry geometry;       // images only
  NumericTable regions;         // ROI tables only: rows = volumes, columns = regions
  DesignMatrix design;
  Diagnostics warnings;         // from the design stage, located at the run
};

struct SubjectPlan {
  const SubjectSpec* spec = nullptr;
  DataKind kind = DataKind::kImage;
  std::vector<RunPlan> runs;
};

// The subjects named in `ids` (all when empty), in config order. Throws Error naming
// an unknown id and the closest known one.
std::vector<const SubjectSpec*> SelectSubjects(const StudySpec& spec,
                                               const std::vector<std::string>& ids);

// Reads every run's header (images) or table (ROI), checks the TR against the image
// header (refused above 1% difference), and builds the designs. Problems are added
// to `diagnostics`, located at the run's config entry; the plan is usable only when
// no error was added.
SubjectPlan PlanSubject(const StudySpec& spec, const SubjectSpec& subject,
                        Diagnostics* diagnostics);

// OUT: the option's output folder when given, else the config's.
std::string OutputRoot(const StudySpec& spec, const StudyOptions& options);

}  // namespace boldsum
