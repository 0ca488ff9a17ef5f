#include <filesystem>
#include <iomanip>
#include <ostream>

#include "boldsum/study.h"
#include "study/check_study.h"
#include "study/run_plan.h"
#include "study/subject_outputs.h"

namespace boldsum {
namespace {

std::string Fixed(double value, int digits) {
  std::ostringstream text;
  text << std::fixed << std::setprecision(digits) << value;
  return text.str();
}

void PrintRunReport(const std::string& subject, const RunPlan& run, const DesignReport& report,
                    const std::vector<std::string>& problems, std::ostream& log) {
  log << subject << " run-" << run.index << ": " << run.n_volumes << " volumes, "
      << run.design.n_columns() << " columns, rank " << report.rank << ", condition number "
      << Fixed(report.condition_number, 1) << "\n";
  log << "  " << std::left << std::setw(24) << "condition" << std::setw(34)
      << "largest |correlation| (with)" << "variance inflation\n";
  for (const auto& condition : report.conditions) {
    log << "  " << std::setw(24) << condition.condition << std::setw(34)
        << (Fixed(condition.max_abs_correlation, 3) + " (" + condition.most_correlated_with + ")")
        << Fixed(condition.variance_inflation, 2) << "\n";
  }
  log << "  " << std::setw(24) << "contrast" << "efficiency 1/c'(X'X)^-1 c\n";
  for (const auto& contrast : report.contrasts) {
    log << "  " << std::setw(24) << contrast.contrast
        << (contrast.estimable ? Fixed(contrast.efficiency, 4) : "not estimable in this run")
        << "\n";
  }
  log << std::right;
  for (const Diagnostic& warning : run.warnings.all()) log << "  " << warning.ToString() << "\n";
  for (const std::string& problem : problems) log << "  unusable: " << problem << "\n";
}

}  // namespace

std::vector<std::string> UsabilityProblems(const RunPlan& run, const DesignReport& report) {
  std::vector<std::string> problems;
  const DesignMatrix& design = run.design;
  std::vector<std::string> real_dependencies;
  for (const std::string& name : report.dependent) {
    for (const DesignColumn& column : design.columns) {
      if (column.name != name) continue;
      const auto j = static_cast<Eigen::Index>(&column - design.columns.data());
      if (!design.x.col(j).isZero(0.0)) real_dependencies.push_back(name);
    }
  }
  if (!real_dependencies.empty()) {
    std::string names;
    for (const std::string& name : real_dependencies) names += (names.empty() ? "" : ", ") + name;
    problems.push_back("rank deficient (rank " + std::to_string(report.rank) + " of " +
                       std::to_string(design.n_columns()) +
                       " columns); linearly dependent columns: " + names);
  }
  if (design.n_volumes() - report.rank < 1) {
    problems.push_back("no residual degrees of freedom (" + std::to_string(design.n_volumes()) +
                       " volumes, rank " + std::to_string(report.rank) + ")");
  }
  return problems;
}

bool CheckStudy(const StudySpec& spec, const StudyOptions& options, std::ostream& log) {
  // Subjects found in a BIDS dataset: what was found, and everything left out and why.
  for (const std::string& line : spec.discovery_report) log << line << "\n";
  Diagnostics diagnostics;
  std::vector<SubjectPlan> plans;
  for (const SubjectSpec* subject : SelectSubjects(spec, options.subjects)) {
    plans.push_back(PlanSubject(spec, *subject, &diagnostics));
  }
  if (diagnostics.HasErrors()) {
    for (const Diagnostic& d : diagnostics.all()) log << d.ToString() << "\n";
    log << diagnostics.ErrorCount() << " error(s); nothing was written\n";
    return false;
  }
  const std::string root = OutputRoot(spec, options);
  bool usable = true;
  for (const SubjectPlan& plan : plans) {
    std::vector<bool> estimable_somewhere(spec.contrasts.size(), false);
    for (const RunPlan& run : plan.runs) {
      const DesignReport report = DescribeDesign(run.design, spec.model, spec.contrasts);
      const std::vector<std::string> problems = UsabilityProblems(run, report);
      usable = usable && problems.empty();
      for (size_t c = 0; c < report.contrasts.size(); ++c) {
        if (report.contrasts[c].estimable) estimable_somewhere[c] = true;
      }
      const std::string folder = (std::filesystem::path(root) / plan.spec->id /
                                  ("run-" + std::to_string(run.index))).string();
      std::filesystem::create_directories(folder);
      WriteRunDesign(run, plan.spec->id, folder);
      PrintRunReport(plan.spec->id, run, report, problems, log);
    }
    for (size_t c = 0; c < spec.contrasts.size(); ++c) {
      if (estimable_somewhere[c]) continue;
      usable = false;
      log << plan.spec->id << ": unusable: contrast '" << spec.contrasts[c].name
          << "' cannot be estimated from any run\n";
    }
  }
  log << (usable ? "all models are usable" : "some models are unusable (see above)")
      << "; designs written under " << root << "\n";
  return usable;
}

}  // namespace boldsum
