// The study report: self-contained HTML pages that show a fitted study (README
// "Reports"). OUT/report/index.html describes the study, OUT/report/subject-<id>.html
// each subject; pictures are inline SVG or PNG, styles inline, no scripts, no network.
#pragma once

#include <iosfwd>
#include <string>

#include "boldsum/config.h"

namespace boldsum {

struct ReportOptions {
  std::string output_dir;    // overrides the config's `output` when not ""
  std::string group_config;  // a group (pool) config whose results to show; "" for none
  int threads = 0;           // subjects measured at once; 0 means one per hardware thread
  bool quiet = false;        // no progress lines
};

struct ReportSummary {
  std::string index_path;  // OUT/report/index.html
  int subject_pages = 0;
  int residuals_measured = 0;  // subjects whose residual pass ran
  int residuals_cached = 0;    // subjects whose cached residual diagnostics were reused
};

// Writes OUT/report/ for every subject of the config (subjects without results are
// listed as missing). Per subject with results it reads the saved fit and makes one
// streamed pass over the data for the residual whiteness and the mean image, cached in
// OUT/report/cache/<id>.bin under the fit's fingerprint (a refit invalidates it; the
// subject folders are never written). Each page is written atomically, the index last;
// pages of subjects no longer in the config are removed. Throws Error for an invalid
// group config or when a page cannot be written.
ReportSummary WriteStudyReport(const StudySpec& spec, const ReportOptions& options,
                               std::ostream& log);

// Where WriteStudyReport puts the study page: OUT/report/index.html.
std::string ReportIndexPath(const StudySpec& spec, const ReportOptions& options);

}  // namespace boldsum
