// The two kinds of report page, assembled from what write_report.cc has loaded.
#pragma once

#include <string>
#include <vector>

#include "boldsum/pool.h"
#include "boldsum/study.h"
#include "report/residual_whiteness.h"
#include "study/fit_record.h"
#include "study/recorded_subject.h"
#include "study/run_plan.h"

namespace boldsum {

// Everything known about one subject when its page is drawn.
struct SubjectInputs {
  const StudySpec* spec = nullptr;
  const SubjectSpec* subject = nullptr;
  SubjectStatus status;
  std::string folder;        // OUT/<id>
  bool has_results = false;  // summary.json and fit_params.bin were read
  RecordedSubject recorded;
  FitRecord record;
  bool has_plan = false;  // the designs could be built from the config
  SubjectPlan plan;
  Diagnostics plan_problems;                       // errors when has_plan is false
  const ResidualDiagnostics* residuals = nullptr;  // nullptr when not measured
  std::string residual_note;                       // why residuals are missing
};

// One line of the study page's subject table.
struct SubjectRow {
  std::string id;
  SubjectStatus status;
  bool has_page = false;
  bool images = true;
  std::vector<int> run_dof;
  double mean_ar1 = 0.0;         // NaN when unknown
  double whiteness_share = 0.0;  // NaN when unknown
  int censored = 0;
  int warnings = 0;
  double outlier_score = 0.0;    // largest modified z of the map distances; NaN if none
  std::string outlier_contrast;  // where it was largest
};

// "subject-<id>.html"
std::string SubjectPageName(const std::string& id);

// The subject's page; fills `row` with the values the study table shows.
std::string SubjectPage(const SubjectInputs& inputs, SubjectRow* row);

// What the study page shows of the group stage: nothing, a note, or the pooled results.
struct GroupResults {
  bool requested = false;  // a group config was given
  GroupSpec spec;
  bool complete = false;          // its summary.json exists
  std::vector<float> background;  // images: mean of the subjects' mean images, or empty
  ImageGeometry background_geometry;
};

std::string StudyPage(const StudySpec& spec, const std::string& root,
                      const std::vector<SubjectRow>& rows, const GroupResults& group);

}  // namespace boldsum
