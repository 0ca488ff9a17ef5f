// WriteStudyReport (declared in boldsum/report.h): loads each subject, measures or reuses
// its residual diagnostics, writes its page, then scores outlying subjects and writes
// the study page.
#include <algorithm>
#include <atomic>
#include <chrono>
#include <cmath>
#include <filesystem>
#include <mutex>
#include <ostream>
#include <thread>

#include "boldsum/report.h"
#include "report/map_figures.h"
#include "report/report_pages.h"
#include "stats/robust_scores.h"
#include "study/fingerprint.h"

namespace fs = std::filesystem;

namespace boldsum {
namespace {

constexpr const char* kReportFolder = "report";

// Identifies the saved fit the cached diagnostics were measured from: the fingerprint
// recorded with it (a refit changes it) and the test's settings.
std::string CacheKey(const std::string& folder, NoiseModel noise) {
  const RecordedFingerprint recorded = ReadRecordedFingerprint(folder + "/summary.json");
  return recorded.fingerprint.model_sha256 + " lags " + std::to_string(kWhitenessLags) +
         " model_df " + std::to_string(WhitenessModelDf(noise));
}

// A cache file's bytes; "" (no usable cache) when it cannot be read.
std::string ReadCacheBytes(const std::string& path) {
  try {
    return ReadFileBytes(path);
  } catch (const Error&) {
    return std::string();
  }
}

GroupResults LoadGroup(const std::string& path) {
  GroupResults group;
  if (path.empty()) return group;
  group.requested = true;
  LoadedGroupConfig loaded = LoadGroupConfig(path);
  if (loaded.diagnostics.HasErrors()) {
    std::string message;
    for (const Diagnostic& d : loaded.diagnostics.all()) {
      if (d.severity == Severity::kError) message += d.ToString() + "\n";
    }
    throw Error(message + std::to_string(loaded.diagnostics.ErrorCount()) +
                " error(s) in the group config; no report was written");
  }
  group.spec = std::move(loaded.spec);
  group.complete = fs::exists(fs::path(group.spec.output_dir) / "summary.json");
  return group;
}

// Shared between the subject workers.
struct ReportState {
  const StudySpec* spec = nullptr;
  std::string root, report_dir, cache_dir;
  std::mutex mutex;
  std::vector<double> background_sum;  // subjects' mean images on the first one's grid
  ImageGeometry background_geometry;
  int background_count = 0;
  std::atomic<int> measured{0}, cached{0}, pages{0};
};

void AddBackground(ReportState* state, const ImageGeometry& geometry,
                   const std::vector<float>& mean) {
  std::lock_guard<std::mutex> lock(state->mutex);
  if (state->background_count == 0) {
    state->background_geometry = geometry;
    state->background_sum.assign(mean.size(), 0.0);
  } else if (!state->background_geometry.SameSpace(geometry)) {
    return;
  }
  for (size_t i = 0; i < mean.size(); ++i) state->background_sum[i] += mean[i];
  ++state->background_count;
}

// Loads, measures (or reuses) and writes one subject's page; returns its table row.
SubjectRow ReportSubject(ReportState* state, const SubjectSpec& subject,
                         const SubjectStatus& status, std::ostream& log, std::mutex& log_mutex,
                         bool quiet) {
  if (IsInterrupted()) throw Error("interrupted");
  const auto start = std::chrono::steady_clock::now();
  SubjectInputs in;
  in.spec = state->spec;
  in.subject = &subject;
  in.status = status;
  in.folder = (fs::path(state->root) / subject.id).string();
  SubjectRow row;
  row.id = subject.id;
  row.status = status;
  row.mean_ar1 = row.whiteness_share = row.outlier_score = std::nan("");
  if (status.state == SubjectStatus::State::kMissing) return row;

  try {
    in.recorded = ReadRecordedSubject(in.folder + "/summary.json");
    in.record = LoadFitRecord(in.folder + "/fit_params.bin");
    in.has_results = !in.record.runs.empty();
  } catch (const Error& error) {
    in.residual_note = std::string("saved results unreadable: ") + error.what();
  }
  Diagnostics problems;
  in.plan = PlanSubject(*state->spec, subject, &problems);
  in.has_plan = !problems.HasErrors();
  for (const Diagnostic& d : problems.all()) {
    if (d.severity == Severity::kError) in.plan_problems.AddError(d.where, d.message);
  }

  ResidualDiagnostics residuals;
  std::string how;
  const bool fit_current = status.state == SubjectStatus::State::kUpToDate ||
                           status.state == SubjectStatus::State::kContrastsChanged;
  if (!in.has_results || !in.has_plan) {
    if (in.residual_note.empty()) in.residual_note = "no usable saved fit and design";
  } else if (!fit_current) {
    in.residual_note = "residual whiteness not measured: the saved fit is out of date (" +
                       status.reason + "); run boldsum fit";
  } else {
    const std::string cache = (fs::path(state->cache_dir) / (subject.id + ".bin")).string();
    const std::string key = CacheKey(in.folder, state->spec->model.noise);
    if (fs::exists(cache) && ParseResidualDiagnostics(ReadCacheBytes(cache), key, &residuals)) {
      ++state->cached;
      how = "residual diagnostics reused";
      in.residuals = &residuals;
    } else {
      try {
        residuals = MeasureResiduals(in.plan, in.record, state->spec->model.noise);
        WriteFileAtomically(cache, SerializeResidualDiagnostics(residuals, key));
        ++state->measured;
        how = "residual diagnostics measured";
        in.residuals = &residuals;
      } catch (const Error& error) {
        in.residual_note = std::string("residual whiteness not measured: ") + error.what();
      }
    }
    if (in.residuals && !residuals.mean_image.empty()) {
      ImageGeometry grid = in.plan.runs.front().geometry;
      grid.n_volumes = 1;
      AddBackground(state, grid, residuals.mean_image);
    }
  }
  const std::string page = SubjectPage(in, &row);
  WriteFileAtomically((fs::path(state->report_dir) / SubjectPageName(subject.id)).string(), page);
  ++state->pages;
  if (!quiet) {
    const double seconds =
        std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
    std::lock_guard<std::mutex> lock(log_mutex);
    log << "report: " << subject.id << ": page written" << (how.empty() ? "" : ", " + how) << " ("
        << FixedText(seconds, 1) << " s)\n";
  }
  return row;
}

// The z values of a subject's t contrast: the map on the grid, or the regions' column.
std::vector<float> ContrastValues(const std::string& folder, const std::string& contrast,
                                  bool images, ImageGeometry* geometry) {
  if (images) return ReadVolume(folder + "/" + contrast + ".z.nii.gz", geometry);
  const Table table = ReadTable(folder + "/summary.tsv");
  const int c = table.ColumnIndex("contrast"), z = table.ColumnIndex("z");
  std::vector<float> values;
  if (c < 0 || z < 0) return values;
  for (const auto& row : table.rows) {
    if (row[static_cast<size_t>(c)] != contrast) continue;
    double value = std::nan("");
    ParseNumber(row[static_cast<size_t>(z)], &value);
    values.push_back(static_cast<float>(value));
  }
  return values;
}

// Fills outlier_score/outlier_contrast: per t contrast, the root mean square distance of
// each subject's z map from the mean of the others' over the values every subject has,
// then modified z-scores of those distances (stats/robust_scores.h). Maps are read twice
// (sum, then distances) so memory stays one map wide.
void ScoreOutliers(const StudySpec& spec, const std::string& root, std::vector<SubjectRow>* rows) {
  for (const ContrastSpec& contrast : spec.contrasts) {
    if (contrast.is_f) continue;
    std::vector<size_t> members;
    for (size_t i = 0; i < rows->size(); ++i) {
      const SubjectRow& row = (*rows)[i];
      const std::string z = (fs::path(root) / row.id / (contrast.name + ".z.nii.gz")).string();
      if (row.has_page && row.status.state == SubjectStatus::State::kUpToDate &&
          (!row.images || fs::exists(z))) {
        members.push_back(i);
      }
    }
    if (members.size() < 3) continue;
    std::vector<double> sum;
    std::vector<int> count;
    ImageGeometry first;
    std::vector<size_t> used;
    for (size_t i : members) {
      ImageGeometry geometry;
      const std::vector<float> values = ContrastValues((fs::path(root) / (*rows)[i].id).string(),
                                                       contrast.name, (*rows)[i].images, &geometry);
      if (used.empty()) {
        first = geometry;
        sum.assign(values.size(), 0.0);
        count.assign(values.size(), 0);
      } else if (values.size() != sum.size() || ((*rows)[i].images && !geometry.SameSpace(first))) {
        continue;
      }
      for (size_t v = 0; v < values.size(); ++v) {
        if (std::isfinite(values[v])) {
          sum[v] += values[v];
          ++count[v];
        }
      }
      used.push_back(i);
    }
    const double n = static_cast<double>(used.size());
    if (used.size() < 3) continue;
    std::vector<double> distances;
    for (size_t i : used) {
      ImageGeometry geometry;
      const std::vector<float> values = ContrastValues((fs::path(root) / (*rows)[i].id).string(),
                                                       contrast.name, (*rows)[i].images, &geometry);
      double squares = 0;
      int64_t shared = 0;
      for (size_t v = 0; v < values.size(); ++v) {
        if (count[v] != static_cast<int>(used.size())) continue;
        const double others = (sum[v] - values[v]) / (n - 1);
        squares += (values[v] - others) * (values[v] - others);
        ++shared;
      }
      distances.push_back(shared ? std::sqrt(squares / static_cast<double>(shared)) : std::nan(""));
    }
    const std::vector<double> scores = ModifiedZScores(distances);
    for (size_t k = 0; k < used.size(); ++k) {
      SubjectRow& row = (*rows)[used[k]];
      if (std::isfinite(scores[k]) &&
          (!std::isfinite(row.outlier_score) || scores[k] > row.outlier_score)) {
        row.outlier_score = scores[k];
        row.outlier_contrast = contrast.name;
      }
    }
  }
}

// Removes pages and cache files of subjects that are no longer in the config.
void RemoveLeftovers(const StudySpec& spec, const std::string& report_dir,
                     const std::string& cache_dir) {
  std::vector<std::string> keep_pages, keep_cache;
  for (const SubjectSpec& subject : spec.subjects) {
    keep_pages.push_back(SubjectPageName(subject.id));
    keep_cache.push_back(subject.id + ".bin");
  }
  const auto sweep = [](const std::string& folder, const std::vector<std::string>& keep,
                        const std::string& prefix, const std::string& suffix) {
    std::error_code error;
    for (const auto& entry : fs::directory_iterator(folder, error)) {
      const std::string name = entry.path().filename().string();
      const bool ours = name.size() > prefix.size() + suffix.size() &&
                        name.compare(0, prefix.size(), prefix) == 0 &&
                        name.compare(name.size() - suffix.size(), suffix.size(), suffix) == 0;
      if (ours && std::find(keep.begin(), keep.end(), name) == keep.end()) {
        std::error_code ignored;
        fs::remove(entry.path(), ignored);
      }
    }
  };
  sweep(report_dir, keep_pages, "subject-", ".html");
  sweep(cache_dir, keep_cache, "", ".bin");
}

ReportSummary WriteReport(const StudySpec& spec, const ReportOptions& options, std::ostream& log) {
  GroupResults group = LoadGroup(options.group_config);
  StudyOptions study_options;
  study_options.output_dir = options.output_dir;
  ReportState state;
  state.spec = &spec;
  state.root = OutputRoot(spec, study_options);
  state.report_dir = (fs::path(state.root) / kReportFolder).string();
  state.cache_dir = (fs::path(state.report_dir) / "cache").string();
  std::error_code error;
  fs::create_directories(state.cache_dir, error);
  if (error || !fs::is_directory(state.cache_dir)) {
    throw Error(state.cache_dir + ": cannot create the report folder (" +
                (error ? error.message() : std::string("a file is in the way")) + ")");
  }
  const std::vector<SubjectStatus> statuses = StudyStatus(spec, study_options);

  std::vector<SubjectRow> rows(spec.subjects.size());
  const int threads = options.threads > 0
                          ? options.threads
                          : static_cast<int>(std::max(1u, std::thread::hardware_concurrency()));
  std::atomic<size_t> next{0};
  std::mutex failure_mutex, log_mutex;
  std::string failure;
  const auto worker = [&] {
    for (size_t i = next++; i < spec.subjects.size(); i = next++) {
      try {
        rows[i] =
            ReportSubject(&state, spec.subjects[i], statuses[i], log, log_mutex, options.quiet);
      } catch (const std::exception& error) {  // Error, or a file-system failure
        std::lock_guard<std::mutex> lock(failure_mutex);
        if (failure.empty()) failure = "subject " + spec.subjects[i].id + ": " + error.what();
      }
    }
  };
  std::vector<std::thread> workers;
  const int concurrency = std::max(1, std::min(threads, static_cast<int>(spec.subjects.size())));
  for (int w = 1; w < concurrency; ++w) workers.emplace_back(worker);
  worker();
  for (std::thread& thread : workers) thread.join();
  if (!failure.empty()) throw Error("report: " + failure);

  ScoreOutliers(spec, state.root, &rows);
  if (state.background_count > 0) {
    group.background.resize(state.background_sum.size());
    for (size_t i = 0; i < state.background_sum.size(); ++i) {
      group.background[i] = static_cast<float>(state.background_sum[i] / state.background_count);
    }
    group.background_geometry = state.background_geometry;
  }
  ReportSummary summary;
  summary.index_path = (fs::path(state.report_dir) / "index.html").string();
  WriteFileAtomically(summary.index_path, StudyPage(spec, state.root, rows, group));
  RemoveLeftovers(spec, state.report_dir, state.cache_dir);
  summary.subject_pages = state.pages;
  summary.residuals_measured = state.measured;
  summary.residuals_cached = state.cached;
  return summary;
}

}  // namespace

ReportSummary WriteStudyReport(const StudySpec& spec, const ReportOptions& options,
                               std::ostream& log) {
  try {
    return WriteReport(spec, options, log);
  } catch (const fs::filesystem_error& error) {
    throw Error(std::string("report: ") + error.what());
  }
}

std::string ReportIndexPath(const StudySpec& spec, const ReportOptions& options) {
  StudyOptions study_options;
  study_options.output_dir = options.output_dir;
  return (fs::path(OutputRoot(spec, study_options)) / kReportFolder / "index.html").string();
}

}  // namespace boldsum
