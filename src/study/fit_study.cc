#include <chrono>
#include <ostream>
#include <thread>

#include "boldsum/study.h"
#include "study/output_stage.h"
#include "study/run_plan.h"
#include "study/subject_fit.h"
#include "study/subject_outputs.h"

namespace boldsum {
namespace {

int ThreadCount(int requested) {
  if (requested > 0) return requested;
  return std::max(1u, std::thread::hardware_concurrency());
}

std::string Seconds(std::chrono::steady_clock::duration elapsed) {
  const double seconds = std::chrono::duration<double>(elapsed).count();
  char text[32];
  std::snprintf(text, sizeof text, "%.1f s", seconds);
  return text;
}

}  // namespace

void FitStudy(const StudySpec& spec, const StudyOptions& options, std::ostream& log) {
  // Every selected subject is planned (headers, designs) before any fitting, so that
  // input problems are reported together and nothing is written.
  Diagnostics diagnostics;
  std::vector<SubjectPlan> plans;
  for (const SubjectSpec* subject : SelectSubjects(spec, options.subjects)) {
    plans.push_back(PlanSubject(spec, *subject, &diagnostics));
  }
  if (diagnostics.HasErrors()) {
    std::string message;
    for (const Diagnostic& d : diagnostics.all()) {
      if (d.severity == Severity::kError) message += d.ToString() + "\n";
    }
    throw Error(message + std::to_string(diagnostics.ErrorCount()) +
                " error(s); nothing was written");
  }
  const std::string root = OutputRoot(spec, options);
  const int threads = ThreadCount(options.threads);
  for (SubjectPlan& plan : plans) {
    const auto start = std::chrono::steady_clock::now();
    const std::string id = plan.spec->id;
    log << "fitting " << id << " (" << plan.runs.size() << " run(s))" << std::endl;
    const SubjectFit subject = FitSubject(spec, std::move(plan), threads);
    for (const Diagnostic& warning : subject.warnings.all()) log << "  " << warning.ToString() << "\n";
    OutputStage stage(root, id);
    WriteSubjectOutputs(spec, subject, &stage);
    stage.Commit();
    int valid = 0;
    for (unsigned char ok : subject.valid) valid += ok;
    log << "  " << id << ": " << valid << " of " << subject.valid.size()
        << (subject.plan.kind == DataKind::kImage ? " voxels" : " regions") << " fitted in "
        << Seconds(std::chrono::steady_clock::now() - start) << "; outputs in " << root << "/"
        << id << std::endl;
  }
}

}  // namespace boldsum
