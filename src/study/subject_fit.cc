#include "study/subject_fit.h"

#include <algorithm>
#include <cmath>

namespace boldsum {
namespace {

// Voxels fitted for an image subject: the config's mask (nonzero, finite), or the
// intersection of every run's automatic mask.
std::vector<int64_t> SubjectVoxels(const StudySpec& spec, const SubjectPlan& plan) {
  const ImageGeometry& grid = plan.runs.front().geometry;
  if (!spec.mask_path.empty()) {
    ImageGeometry mask_geometry;
    const std::vector<float> mask = ReadVolume(spec.mask_path, &mask_geometry);
    if (!mask_geometry.SameSpace(grid)) {
      throw Error(spec.mask_path + ": mask grid or orientation differs from " +
                  plan.runs.front().spec->data_path);
    }
    std::vector<int64_t> voxels;
    for (int64_t i = 0; i < static_cast<int64_t>(mask.size()); ++i) {
      if (std::isfinite(mask[i]) && mask[i] != 0.0f) voxels.push_back(i);
    }
    return voxels;
  }
  std::vector<int64_t> voxels = AutomaticMask(plan.runs.front().spec->data_path);
  for (size_t r = 1; r < plan.runs.size(); ++r) {
    const std::vector<int64_t> other = AutomaticMask(plan.runs[r].spec->data_path);
    std::vector<int64_t> both;
    std::set_intersection(voxels.begin(), voxels.end(), other.begin(), other.end(),
                          std::back_inserter(both));
    voxels.swap(both);
  }
  return voxels;
}

// Fixed effects over the runs that can estimate the contrast.
void CombineContrast(const SubjectFit& subject, ContrastOutcome* outcome, int threads) {
  std::vector<const ContrastEstimate*> usable;
  for (size_t r = 0; r < outcome->per_run.size(); ++r) {
    const int index = subject.plan.runs[r].index;
    if (outcome->per_run[r].estimable) {
      usable.push_back(&outcome->per_run[r]);
      outcome->runs_used.push_back(index);
    } else {
      outcome->runs_left_out.push_back(index);
    }
  }
  outcome->estimable = !usable.empty();
  if (!outcome->estimable) return;
  if (outcome->files_kept) {  // only what summary.json records: no per-voxel values
    outcome->combined = ContrastEstimate();
    outcome->combined.q = usable.front()->q;
    outcome->combined.dof = 0;
    for (const ContrastEstimate* run : usable) outcome->combined.dof += run->dof;
    return;
  }
  outcome->combined = CombineFixedEffects(usable);
  outcome->test = TestContrast(outcome->combined, outcome->spec->is_f, threads);
}

}  // namespace

std::vector<int64_t> AutomaticMask(const std::string& image_path) {
  ImageGeometry geometry;
  const std::vector<float> first = ReadVolume(image_path, &geometry);
  std::vector<float> finite;
  finite.reserve(first.size());
  for (float value : first) {
    if (std::isfinite(value)) finite.push_back(value);
  }
  std::vector<int64_t> voxels;
  if (finite.empty()) return voxels;
  const size_t rank = static_cast<size_t>(0.98 * static_cast<double>(finite.size() - 1));
  std::nth_element(finite.begin(), finite.begin() + static_cast<std::ptrdiff_t>(rank),
                   finite.end());
  const float threshold = 0.2f * finite[rank];
  for (int64_t i = 0; i < static_cast<int64_t>(first.size()); ++i) {
    if (std::isfinite(first[i]) && first[i] > threshold) voxels.push_back(i);
  }
  return voxels;
}

namespace {

// Validity across runs, then every contrast per run and combined.
void EvaluateContrasts(const StudySpec& spec, SubjectFit* subject, int threads,
                       const KeepContrastFiles& keep_files) {
  const std::vector<RunPlan>& runs = subject->plan.runs;
  FitOptions options;
  options.noise = spec.model.noise;
  options.threads = threads;
  const size_t n_voxels = subject->runs.front().valid.size();
  subject->valid.assign(n_voxels, 1);
  for (const RunFit& fit : subject->runs) {
    for (size_t v = 0; v < n_voxels; ++v) subject->valid[v] &= fit.valid[v];
  }
  std::vector<ContrastOutcome> outcomes(spec.contrasts.size());
  for (size_t k = 0; k < outcomes.size(); ++k) {
    ContrastOutcome& outcome = outcomes[k];
    outcome.spec = &spec.contrasts[k];
    for (const RunPlan& run : runs) outcome.weights.push_back(ContrastWeights(*outcome.spec, run.design));
    // A contrast that keeps its earlier files needs no per-voxel values.
    outcome.files_kept = keep_files && keep_files(outcome, subject->plan);
  }
  for (size_t r = 0; r < runs.size(); ++r) {
    const RunFit& fit = subject->runs[r];
    // The other contrasts of the run at once (one factorisation per voxel serves them all;
    // each is bit for bit what it would be alone).
    std::vector<Eigen::MatrixXd> weights;
    for (const ContrastOutcome& outcome : outcomes) {
      if (!outcome.files_kept) weights.push_back(outcome.weights[r]);
    }
    std::vector<ContrastEstimate> estimates;
    if (!weights.empty()) estimates = EstimateContrasts(fit, weights, options);
    size_t next = 0;
    for (ContrastOutcome& outcome : outcomes) {
      if (!outcome.files_kept) {
        outcome.per_run.push_back(std::move(estimates[next++]));
        continue;
      }
      ContrastEstimate estimability;
      estimability.q = static_cast<int>(outcome.weights[r].rows());
      estimability.dof = fit.dof;
      estimability.estimable = IsContrastEstimable(fit, outcome.weights[r]);
      outcome.per_run.push_back(std::move(estimability));
    }
  }
  for (ContrastOutcome& outcome : outcomes) {
    const ContrastSpec& contrast = *outcome.spec;
    CombineContrast(*subject, &outcome, threads);
    for (int index : outcome.runs_left_out) {
      subject->warnings.AddWarning(
          {}, "run " + std::to_string(index) + ": contrast '" + contrast.name +
                  "' cannot be estimated from this run's design; the run is left out of it");
    }
    if (!outcome.estimable) {
      subject->warnings.AddWarning(
          {}, "contrast '" + contrast.name + "' cannot be estimated from any run");
    }
    subject->contrasts.push_back(std::move(outcome));
  }
}

// Streams an image run through FitRun, reporting volumes and honouring interruption.
class StreamSource : public BlockSource {
 public:
  StreamSource(VolumeStream* stream, int volumes, int voxels, int64_t volumes_before,
               const VolumeCallback& on_volumes)
      : stream_(stream),
        volumes_(volumes),
        voxels_(voxels),
        read_(volumes_before),
        on_volumes_(on_volumes) {}
  int n_volumes() const override { return volumes_; }
  int n_voxels() const override { return voxels_; }
  int BackgroundThreads() const override { return 1; }  // VolumeStream's decoder
  bool Next(Eigen::MatrixXf* block) override {
    if (!stream_->Next(block)) return false;
    read_ += block->rows();
    if (on_volumes_) on_volumes_(read_);
    return true;
  }

 private:
  VolumeStream* stream_;
  int volumes_;
  int voxels_;
  int64_t read_;
  const VolumeCallback& on_volumes_;
};

}  // namespace

SubjectFit FitSubject(const StudySpec& spec, SubjectPlan plan, int threads,
                      const VolumeCallback& on_volumes) {
  SubjectFit subject;
  subject.plan = std::move(plan);
  subject.threads = threads;
  const std::vector<RunPlan>& runs = subject.plan.runs;
  FitOptions options;
  options.noise = spec.model.noise;
  options.threads = threads;

  if (subject.plan.kind == DataKind::kImage) {
    subject.geometry = runs.front().geometry;
    subject.voxels = SubjectVoxels(spec, subject.plan);
    if (subject.voxels.empty()) {
      throw Error("subject " + subject.plan.spec->id + ": the mask holds no voxels");
    }
  } else {
    subject.regions = runs.front().regions.names;
  }

  int64_t volumes_read = 0;
  for (const RunPlan& run : runs) {
    if (run.kind == DataKind::kImage) {
      // Blocks of 32 volumes keep memory flat in N while GEMM stays efficient.
      VolumeStream stream(run.spec->data_path, subject.voxels, 32);
      StreamSource source(&stream, run.n_volumes, static_cast<int>(subject.voxels.size()),
                          volumes_read, on_volumes);
      subject.runs.push_back(FitRun(run.design.x, &source, options));
    } else {
      MatrixSource source(run.regions.values);
      subject.runs.push_back(FitRun(run.design.x, &source, options));
    }
    volumes_read += run.n_volumes;
    if (on_volumes) on_volumes(volumes_read);
  }
  EvaluateContrasts(spec, &subject, threads, nullptr);
  return subject;
}

SubjectFit RefitContrasts(const StudySpec& spec, SubjectPlan plan, FitRecord record, int threads,
                          const KeepContrastFiles& keep_files) {
  SubjectFit subject;
  subject.plan = std::move(plan);
  subject.threads = threads;
  const std::vector<RunPlan>& runs = subject.plan.runs;
  const std::string where = "subject " + subject.plan.spec->id + ": saved fit";
  if (record.runs.size() != runs.size()) throw Error(where + " has a different number of runs");
  for (size_t r = 0; r < runs.size(); ++r) {
    if (record.runs[r].beta.rows() != runs[r].design.n_columns()) {
      throw Error(where + " does not match run " + std::to_string(r + 1) + "'s design");
    }
  }
  if (subject.plan.kind == DataKind::kImage) {
    subject.geometry = runs.front().geometry;
    subject.voxels = std::move(record.voxels);
  } else {
    subject.regions = runs.front().regions.names;
  }
  subject.runs = std::move(record.runs);
  EvaluateContrasts(spec, &subject, threads, keep_files);
  return subject;
}

}  // namespace boldsum
