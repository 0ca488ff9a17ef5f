// What `check` concludes about one run's model, shared with the report.
#pragma once

#include <string>
#include <vector>

#include "boldsum/design.h"
#include "study/run_plan.h"

namespace boldsum {

// Reasons why a run's model cannot be fitted as it stands (empty when it can). A rank
// deficiency made only of all-zero condition columns (a condition without events in
// this run) is usable: contrasts needing that condition leave the run out.
std::vector<std::string> UsabilityProblems(const RunPlan& run, const DesignReport& report);

}  // namespace boldsum
