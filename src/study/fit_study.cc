#include <unistd.h>

#include <algorithm>
#include <atomic>
#include <chrono>
#include <filesystem>
#include <mutex>
#include <ostream>
#include <sstream>
#include <thread>

#include "boldsum/study.h"
#include "study/fingerprint.h"
#include "study/output_stage.h"
#include "study/progress.h"
#include "study/recorded_subject.h"
#include "study/run_plan.h"
#include "study/subject_fit.h"
#include "study/subject_outputs.h"

namespace fs = std::filesystem;

namespace boldsum {
namespace {

enum class Action { kSkip, kContrasts, kRefit };

struct Decision {
  Action action = Action::kRefit;
  std::string reason;
  SubjectFingerprint fingerprint;
};

std::string SubjectDir(const std::string& root, const std::string& id) {
  return (fs::path(root) / id).string();
}

Decision Decide(const StudySpec& spec, const SubjectSpec& subject, const std::string& root,
                bool force, ChecksumCache* checksums) {
  Decision decision;
  decision.fingerprint = FingerprintSubject(spec, subject, checksums);
  const std::string dir = SubjectDir(root, subject.id);
  const RecordedFingerprint recorded = ReadRecordedFingerprint(dir + "/summary.json");
  const SubjectFingerprint& now = decision.fingerprint;
  if (!recorded.found) {
    decision.reason = "missing (no earlier results)";
  } else if (force) {
    decision.reason = "refit requested (--force)";
  } else if (recorded.fingerprint.model_sha256 != now.model_sha256) {
    std::string changed;
    for (const auto& [path, sha] : now.inputs) {
      const auto before = recorded.fingerprint.inputs.find(path);
      if (before == recorded.fingerprint.inputs.end() || before->second != sha) {
        changed += (changed.empty() ? "" : ", ") + fs::path(path).filename().string();
      }
    }
    decision.reason = changed.empty() ? "stale: model settings changed"
                                      : "stale: inputs changed (" + changed + ")";
  } else if (recorded.fingerprint.contrasts_sha256 != now.contrasts_sha256) {
    if (fs::exists(dir + "/fit_params.bin")) {
      decision.action = Action::kContrasts;
      decision.reason = "stale: contrasts changed";
    } else {
      decision.reason = "stale: contrasts changed and the saved fit is missing";
    }
  } else {
    decision.action = Action::kSkip;
    decision.reason = "up to date";
  }
  return decision;
}

// A rough upper bound of one subject's peak memory: per run the fit (beta, Gram,
// accumulators), per contrast the per-run and combined estimates, and the streamed
// blocks and output maps on the full grid.
double EstimateSubjectBytes(const StudySpec& spec, const SubjectPlan& plan) {
  double voxels = 0, grid = 0, p = 0;
  for (const RunPlan& run : plan.runs) {
    p = std::max(p, static_cast<double>(run.design.n_columns()));
    voxels = run.kind == DataKind::kImage ? static_cast<double>(run.geometry.n_voxels())
                                          : static_cast<double>(run.regions.values.cols());
    grid = run.kind == DataKind::kImage ? voxels : 0;
  }
  const double runs = static_cast<double>(plan.runs.size());
  const double contrasts = static_cast<double>(spec.contrasts.size());
  return 8 * voxels * (runs * (5 * p + 4) + contrasts * (runs + 2) * 4) + 4 * grid * 80;
}

int SubjectConcurrency(const StudySpec& spec, const std::vector<SubjectPlan>& plans,
                       const StudyOptions& options, int threads) {
  double budget = options.memory_gb * 1e9;
  if (budget <= 0) {
    budget = 0.5 * static_cast<double>(sysconf(_SC_PHYS_PAGES)) *
             static_cast<double>(sysconf(_SC_PAGE_SIZE));
  }
  double largest = 1;
  for (const SubjectPlan& plan : plans)
    largest = std::max(largest, EstimateSubjectBytes(spec, plan));
  const int by_memory = std::max(1, static_cast<int>(budget / largest));
  return std::max(1, std::min({threads, by_memory, static_cast<int>(plans.size())}));
}

std::string Seconds(std::chrono::steady_clock::duration elapsed) {
  char text[32];
  std::snprintf(text, sizeof text, "%.1f s", std::chrono::duration<double>(elapsed).count());
  return text;
}

void ThrowIfInterrupted() {
  if (IsInterrupted()) throw Error("interrupted");
}

// Brings one subject up to date and moves its outputs into place.
void RunSubject(const StudySpec& spec, SubjectPlan plan, const Decision& decision,
                const std::string& root, int threads, StudyProgress* progress) {
  const auto start = std::chrono::steady_clock::now();
  const std::string id = plan.spec->id;
  int64_t volumes = 0;
  for (const RunPlan& run : plan.runs) volumes += run.n_volumes;
  progress->Started(id, volumes);
  for (const RunPlan& run : plan.runs) {
    for (const Diagnostic& warning : run.warnings.all()) progress->Log("  " + warning.ToString());
  }
  SubjectFit subject;
  std::string earlier;  // the subject's folder when only contrasts changed
  if (decision.action == Action::kContrasts) {
    earlier = SubjectDir(root, id);
    const RecordedSubject recorded = ReadRecordedSubject(earlier + "/summary.json");
    // A contrast whose type and weights are unchanged keeps its image files.
    const KeepContrastFiles keep = [&](const ContrastOutcome& outcome, const SubjectPlan& plan) {
      const RecordedContrast* before = recorded.Find(outcome.spec->name);
      if (recorded.kind != DataKind::kImage || before == nullptr || !before->estimable ||
          before->outputs_key != ContrastOutputsKey(outcome, plan)) {
        return false;
      }
      std::error_code ec;
      for (const std::string& file : ContrastImageFiles(*outcome.spec)) {
        if (!fs::is_regular_file(earlier + "/" + file, ec)) return false;
      }
      return true;
    };
    subject = RefitContrasts(spec, std::move(plan), LoadFitRecord(earlier + "/fit_params.bin"),
                             threads, keep);
  } else {
    subject = FitSubject(spec, std::move(plan), threads, [&](int64_t read) {
      ThrowIfInterrupted();
      progress->Advanced(id, read);
    });
  }
  ThrowIfInterrupted();
  for (const Diagnostic& warning : subject.warnings.all()) {
    progress->Log("  " + id + ": warning: " + warning.message);
  }
  OutputStage stage(root, id);
  WriteSubjectOutputs(spec, subject, decision.fingerprint, &stage, earlier);
  ThrowIfInterrupted();
  stage.Commit();
  int valid = 0;
  for (unsigned char ok : subject.valid) valid += ok;
  progress->Finished(id);
  int kept = 0;
  for (const ContrastOutcome& outcome : subject.contrasts) kept += outcome.files_kept;
  const std::string done = decision.action != Action::kContrasts ? "fitted"
                           : kept == 0                           ? "contrasts recomputed"
                                       : "contrasts recomputed (" + std::to_string(kept) + " of " +
                                             std::to_string(subject.contrasts.size()) +
                                             " unchanged, files kept)";
  progress->Log(id + ": " + done + ", " + std::to_string(valid) + " of " +
                std::to_string(subject.valid.size()) +
                (subject.plan.kind == DataKind::kImage ? " voxels" : " regions") + " in " +
                Seconds(std::chrono::steady_clock::now() - start));
}

}  // namespace

int FitStudy(const StudySpec& spec, const StudyOptions& options, std::ostream& log) {
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
  fs::create_directories(root);
  ChecksumCache checksums((fs::path(root) / ".checksums.tsv").string());
  const ProgressMode mode = options.quiet           ? ProgressMode::kQuiet
                            : options.live_progress ? ProgressMode::kLive
                                                    : ProgressMode::kLines;
  std::vector<Decision> decisions;
  std::vector<size_t> work;
  int skipped = 0;
  {
    StudyProgress progress(static_cast<int>(plans.size()), ProgressMode::kQuiet, log);
    for (size_t i = 0; i < plans.size(); ++i) {
      decisions.push_back(Decide(spec, *plans[i].spec, root, options.force, &checksums));
      if (decisions.back().action == Action::kSkip) {
        ++skipped;
      } else {
        work.push_back(i);
      }
    }
  }
  checksums.Save();

  const int threads = options.threads > 0
                          ? options.threads
                          : static_cast<int>(std::max(1u, std::thread::hardware_concurrency()));
  std::vector<SubjectPlan> pending;
  for (size_t i : work) pending.push_back(plans[i]);
  const int concurrency = pending.empty() ? 1 : SubjectConcurrency(spec, pending, options, threads);
  const int threads_each = std::max(1, threads / concurrency);

  StudyProgress progress(static_cast<int>(work.size()), mode, log);
  for (size_t i = 0; i < plans.size(); ++i) {
    progress.Log(plans[i].spec->id + ": " + decisions[i].reason +
                 (decisions[i].action == Action::kSkip        ? ", skipped"
                  : decisions[i].action == Action::kContrasts ? ", recomputing contrasts"
                                                              : ", fitting"));
  }
  if (!work.empty() && concurrency > 1) {
    progress.Log(std::to_string(concurrency) + " subjects at a time, " +
                 std::to_string(threads_each) + " thread(s) each");
  }
  std::atomic<size_t> next{0};
  std::mutex failure_mutex;
  std::string failure;
  const auto worker = [&] {
    for (size_t k = next++; k < work.size(); k = next++) {
      {
        std::lock_guard<std::mutex> lock(failure_mutex);
        if (!failure.empty()) return;
      }
      const size_t i = work[k];
      try {
        ThrowIfInterrupted();
        RunSubject(spec, plans[i], decisions[i], root, threads_each, &progress);
      } catch (const Error& error) {
        std::lock_guard<std::mutex> lock(failure_mutex);
        if (failure.empty()) failure = "subject " + plans[i].spec->id + ": " + error.what();
        return;
      }
    }
  };
  std::vector<std::thread> workers;
  for (int w = 1; w < concurrency; ++w) workers.emplace_back(worker);
  worker();
  for (std::thread& thread : workers) thread.join();
  if (!failure.empty()) {
    if (IsInterrupted()) {
      throw Error(
          "interrupted: subjects finished before the interruption keep their outputs; "
          "the subjects in progress left no files");
    }
    throw Error(failure);
  }
  progress.Log(std::to_string(work.size()) + " subject(s) brought up to date, " +
               std::to_string(skipped) + " already up to date");
  // The pool-ready stacks need every subject; a fit of selected subjects (one job of a
  // workflow, say) leaves them to `boldsum gather`.
  // Subjects that cannot be stacked together (ROI tables mixed with images, subjects on
  // different grids) are a note here, not a failure: every subject was fitted.
  if (options.subjects.empty()) {
    std::ostringstream gather_log;
    try {
      GatherStudy(spec, options, gather_log);
    } catch (const Error& error) {
      gather_log << "note: pool-ready/ not written: " << error.what() << "\n";
    }
    std::istringstream lines(gather_log.str());
    for (std::string line; std::getline(lines, line);) progress.Log(line);
  }
  return static_cast<int>(work.size());
}

std::vector<SubjectStatus> StudyStatus(const StudySpec& spec, const StudyOptions& options) {
  const std::string root = OutputRoot(spec, options);
  ChecksumCache checksums((fs::path(root) / ".checksums.tsv").string());
  std::vector<SubjectStatus> statuses;
  for (const SubjectSpec* subject : SelectSubjects(spec, options.subjects)) {
    const Decision decision = Decide(spec, *subject, root, false, &checksums);
    SubjectStatus status;
    status.id = subject->id;
    status.reason = decision.reason;
    if (decision.action == Action::kSkip) {
      status.state = SubjectStatus::State::kUpToDate;
    } else if (decision.action == Action::kContrasts) {
      status.state = SubjectStatus::State::kContrastsChanged;
    } else {
      status.state = ReadRecordedFingerprint(SubjectDir(root, subject->id) + "/summary.json").found
                         ? SubjectStatus::State::kStale
                         : SubjectStatus::State::kMissing;
    }
    statuses.push_back(std::move(status));
  }
  if (fs::exists(root)) checksums.Save();
  return statuses;
}

int PrintStudyStatus(const StudySpec& spec, const StudyOptions& options, std::ostream& out) {
  int not_current = 0;
  for (const SubjectStatus& status : StudyStatus(spec, options)) {
    not_current += status.state != SubjectStatus::State::kUpToDate;
    out << status.id << "\t" << status.reason << "\n";
  }
  return not_current;
}

}  // namespace boldsum
