#include "study/subject_outputs.h"

#include <atomic>
#include <cmath>
#include <exception>
#include <filesystem>
#include <functional>
#include <limits>
#include <mutex>
#include <sstream>
#include <thread>

namespace boldsum {
namespace {

constexpr float kNaN = std::numeric_limits<float>::quiet_NaN();

// A per-voxel value spread onto the full grid; NaN outside the mask and where invalid.
std::vector<float> ToGrid(const SubjectFit& subject, const Eigen::VectorXd& values) {
  std::vector<float> grid(static_cast<size_t>(subject.geometry.n_voxels()), kNaN);
  for (size_t v = 0; v < subject.voxels.size(); ++v) {
    if (!subject.valid[v]) continue;
    grid[static_cast<size_t>(subject.voxels[v])] =
        static_cast<float>(values[static_cast<Eigen::Index>(v)]);
  }
  return grid;
}

std::string RunDesignSvg(const RunPlan& run, const std::string& subject_id) {
  return DesignToSvg(run.design, subject_id + " run " + std::to_string(run.index));
}

void WriteMap(const SubjectFit& subject, const Eigen::VectorXd& values, const std::string& path) {
  ImageGeometry geometry = subject.geometry;
  geometry.n_volumes = 1;
  WriteImage(path, geometry, ToGrid(subject, values));
}

std::string ColumnWeightsJson(const Eigen::MatrixXd& weights, const DesignMatrix& design) {
  std::string rows = "[";
  for (Eigen::Index i = 0; i < weights.rows(); ++i) {
    std::string row = "{";
    for (Eigen::Index j = 0; j < weights.cols(); ++j) {
      if (weights(i, j) == 0.0) continue;
      if (row.size() > 1) row += ", ";
      row +=
          JsonQuote(design.columns[static_cast<size_t>(j)].name) + ": " + JsonNumber(weights(i, j));
    }
    rows += (i ? ", " : "") + row + "}";
  }
  return rows + "]";
}

std::string WeightsByRunJson(const ContrastOutcome& outcome, const SubjectPlan& plan) {
  std::string text = "[";
  for (size_t r = 0; r < outcome.weights.size(); ++r) {
    text += (r ? ", " : "") + ColumnWeightsJson(outcome.weights[r], plan.runs[r].design);
  }
  return text + "]";
}

// Files to write, each by one task that writes a single file under a temporary name and
// renames it, so that tasks may run in any order and at the same time. Folders and
// paths are set up (and earlier files adopted) before the tasks run.
class WriteTasks {
 public:
  void Add(std::function<void()> task) { tasks_.push_back(std::move(task)); }

  // Runs every task on up to `threads` threads; after all have stopped, rethrows the
  // first error (tasks not yet started are skipped once one has failed).
  void Run(int threads) {
    std::atomic<size_t> next{0};
    std::exception_ptr failure;
    std::mutex failure_mutex;
    const auto work = [&] {
      for (size_t k = next++; k < tasks_.size(); k = next++) {
        try {
          tasks_[k]();
        } catch (...) {
          std::lock_guard<std::mutex> lock(failure_mutex);
          if (!failure) failure = std::current_exception();
          next = tasks_.size();
        }
      }
    };
    std::vector<std::thread> pool;
    const size_t extra = std::min(static_cast<size_t>(std::max(threads, 1)), tasks_.size());
    for (size_t t = 1; t < extra; ++t) pool.emplace_back(work);
    work();
    for (std::thread& t : pool) t.join();
    if (failure) std::rethrow_exception(failure);
  }

 private:
  std::vector<std::function<void()>> tasks_;
};

// Takes `relative` over from the earlier folder when it is there, else adds the task
// that writes it.
void AdoptOrWrite(const std::string& earlier, const std::string& relative, OutputStage* stage,
                  WriteTasks* tasks, std::function<void(const std::string&)> write) {
  std::error_code ec;
  if (!earlier.empty() && std::filesystem::is_regular_file(earlier + "/" + relative, ec)) {
    stage->Adopt(relative, earlier + "/" + relative);
  } else {
    tasks->Add([write = std::move(write), path = stage->PathFor(relative)] { write(path); });
  }
}

std::string IntListJson(const std::vector<int>& values) {
  std::string text = "[";
  for (size_t i = 0; i < values.size(); ++i) text += (i ? ", " : "") + std::to_string(values[i]);
  return text + "]";
}

double MeanValid(const Eigen::VectorXd& values, const std::vector<unsigned char>& valid) {
  double sum = 0;
  int count = 0;
  for (Eigen::Index v = 0; v < values.size(); ++v) {
    if (valid[static_cast<size_t>(v)]) {
      sum += values[v];
      ++count;
    }
  }
  return count ? sum / count : std::nan("");
}

std::string StringListJson(const std::vector<std::string>& values, const std::string& indent) {
  if (values.empty()) return "[]";
  std::string text = "[";
  for (size_t i = 0; i < values.size(); ++i) {
    text += (i ? "," : "") + ("\n" + indent + "  ") + JsonQuote(values[i]);
  }
  return text + "\n" + indent + "]";
}

// Warning texts without their config locations: line numbers move when the config is
// edited, and summary.json must not change unless the subject's results do.
std::vector<std::string> Messages(const Diagnostics& diagnostics) {
  std::vector<std::string> messages;
  for (const Diagnostic& d : diagnostics.all()) messages.push_back(d.message);
  return messages;
}

std::string SummaryJson(const StudySpec& spec, const SubjectFit& subject,
                        const SubjectFingerprint& fingerprint) {
  std::ostringstream json;
  const SubjectPlan& plan = subject.plan;
  json << "{\n  \"tool\": \"boldsum\",\n  \"version\": " << JsonQuote(BOLDSUM_VERSION) << ",\n"
       << "  \"subject\": " << JsonQuote(plan.spec->id) << ",\n"
       << "  \"config\": " << JsonQuote(spec.config_path) << ",\n"
       << "  \"fingerprint\": {\"model_sha256\": " << JsonQuote(fingerprint.model_sha256)
       << ", \"contrasts_sha256\": " << JsonQuote(fingerprint.contrasts_sha256)
       << ",\n    \"inputs\": [";
  size_t input = 0;
  for (const auto& [path, sha] : fingerprint.inputs) {
    json << (input++ ? "," : "") << "\n      {\"path\": " << JsonQuote(path)
         << ", \"sha256\": " << JsonQuote(sha) << "}";
  }
  json << "]},\n"
       << "  \"data_kind\": " << JsonQuote(plan.kind == DataKind::kImage ? "image" : "regions")
       << ",\n"
       << "  \"autocorrelation\": "
       << JsonQuote(spec.model.noise == NoiseModel::kAr1 ? "ar1" : "none") << ",\n";
  if (plan.kind == DataKind::kImage) {
    int in_mask = 0;
    for (unsigned char ok : subject.valid) in_mask += ok;
    json << "  \"mask\": " << JsonQuote(spec.mask_path.empty() ? "automatic" : spec.mask_path)
         << ",\n  \"voxels_fitted\": " << subject.voxels.size()
         << ",\n  \"voxels_in_output_mask\": " << in_mask << ",\n";
  } else {
    json << "  \"regions\": [";
    for (size_t i = 0; i < subject.regions.size(); ++i) {
      json << (i ? ", " : "") << JsonQuote(subject.regions[i]);
    }
    json << "],\n";
  }
  json << "  \"runs\": [";
  for (size_t r = 0; r < plan.runs.size(); ++r) {
    const RunPlan& run = plan.runs[r];
    const RunFit& fit = subject.runs[r];
    int censored = 0;
    for (const DesignColumn& column : run.design.columns)
      censored += column.kind == ColumnKind::kCensor;
    json << (r ? "," : "") << "\n    {\"run\": " << run.index
         << ", \"data\": " << JsonQuote(run.spec->data_path)
         << ",\n     \"events\": " << JsonQuote(run.spec->events_path)
         << ",\n     \"confounds\": " << JsonQuote(run.spec->confounds_path)
         << ",\n     \"volumes\": " << run.n_volumes << ", \"columns\": [";
    for (size_t j = 0; j < run.design.columns.size(); ++j) {
      json << (j ? ", " : "") << JsonQuote(run.design.columns[j].name);
    }
    json << "],\n     \"rank\": " << fit.rank << ", \"dof\": " << fit.dof
         << ", \"censored_volumes\": " << censored
         << ", \"mean_ar1\": " << JsonNumber(MeanValid(fit.rho, fit.valid))
         << ", \"excluded_nonfinite\": " << fit.n_nonfinite
         << ", \"excluded_zero_variance\": " << fit.n_constant
         << ",\n     \"warnings\": " << StringListJson(Messages(run.warnings), "     ") << "}";
  }
  json << "\n  ],\n  \"contrasts\": [";
  for (size_t c = 0; c < subject.contrasts.size(); ++c) {
    const ContrastOutcome& outcome = subject.contrasts[c];
    json << (c ? "," : "") << "\n    {\"name\": " << JsonQuote(outcome.spec->name)
         << ", \"type\": " << JsonQuote(outcome.spec->is_f ? "F" : "t")
         << ", \"rows\": " << outcome.spec->rows.size()
         << ", \"estimable\": " << (outcome.estimable ? "true" : "false")
         << ", \"dof\": " << JsonNumber(outcome.estimable ? outcome.combined.dof : std::nan(""))
         << ",\n     \"runs_used\": " << IntListJson(outcome.runs_used)
         << ", \"runs_left_out\": " << IntListJson(outcome.runs_left_out)
         << ",\n     \"outputs_key\": " << JsonQuote(ContrastOutputsKey(outcome, plan))
         << ",\n     \"weights_by_run\": " << WeightsByRunJson(outcome, plan) << "}";
  }
  json << "\n  ],\n  \"warnings\": " << StringListJson(Messages(subject.warnings), "  ") << "\n}\n";
  return json.str();
}

// ROI rows "contrast region estimate variance dof t z [ar1]" for t contrasts, and
// "contrast region f dof1 dof2 z" for F contrasts.
struct RegionTables {
  std::string t_rows;
  std::string f_rows;
};

void AddRegionRows(const ContrastSpec& contrast, const ContrastEstimate& estimate,
                   const ContrastTest& test, const SubjectFit& subject, const RunFit* run_fit,
                   RegionTables* tables) {
  for (size_t v = 0; v < subject.regions.size(); ++v) {
    const auto i = static_cast<Eigen::Index>(v);
    const bool ok = estimate.valid[v] != 0;
    const auto value = [&](double x) { return TsvNumber(ok ? x : std::nan("")); };
    if (!contrast.is_f) {
      tables->t_rows += contrast.name + "\t" + subject.regions[v] + "\t" +
                        value(estimate.effect(0, i)) + "\t" + value(estimate.covariance(0, i)) +
                        "\t" + TsvNumber(estimate.dof) + "\t" + value(test.stat[i]) + "\t" +
                        value(test.z[i]);
      if (run_fit) tables->t_rows += "\t" + value(run_fit->rho[i]);
      tables->t_rows += "\n";
    } else {
      tables->f_rows += contrast.name + "\t" + subject.regions[v] + "\t" + value(test.stat[i]) +
                        "\t" + std::to_string(estimate.q) + "\t" + TsvNumber(estimate.dof) + "\t" +
                        value(test.z[i]) + "\n";
    }
  }
}

void WriteRegionTables(const RegionTables& tables, bool with_ar1, const std::string& folder,
                       OutputStage* stage) {
  const std::string prefix = folder.empty() ? "" : folder + "/";
  WriteFileAtomically(stage->PathFor(prefix + "summary.tsv"),
                      std::string("contrast\tregion\testimate\tvariance\tdof\tt\tz") +
                          (with_ar1 ? "\tar1" : "") + "\n" + tables.t_rows);
  WriteFileAtomically(stage->PathFor(prefix + "f_tests.tsv"),
                      "contrast\tregion\tf\tdof1\tdof2\tz\n" + tables.f_rows);
}

}  // namespace

std::string TsvNumber(double value) {
  if (std::isnan(value)) return "n/a";
  return JsonNumber(value);
}

void WriteRunDesign(const RunPlan& run, const std::string& subject_id, const std::string& folder) {
  WriteFileAtomically(folder + "/design.tsv", DesignToTsv(run.design));
  WriteFileAtomically(folder + "/design.svg", RunDesignSvg(run, subject_id));
}

std::vector<std::string> ContrastImageFiles(const ContrastSpec& contrast) {
  if (contrast.is_f) return {contrast.name + ".f.nii.gz", contrast.name + ".z.nii.gz"};
  return {contrast.name + ".estimate.nii.gz", contrast.name + ".variance.nii.gz",
          contrast.name + ".t.nii.gz", contrast.name + ".z.nii.gz"};
}

std::string ContrastOutputsKey(const ContrastOutcome& outcome, const SubjectPlan& plan) {
  return Sha256(std::string(outcome.spec->is_f ? "F " : "t ") + WeightsByRunJson(outcome, plan));
}

void WriteSubjectOutputs(const StudySpec& spec, const SubjectFit& subject,
                         const SubjectFingerprint& fingerprint, OutputStage* stage,
                         const std::string& earlier) {
  const SubjectPlan& plan = subject.plan;
  const bool images = plan.kind == DataKind::kImage;
  WriteTasks tasks;
  for (size_t r = 0; r < plan.runs.size(); ++r) {
    const RunPlan& run = plan.runs[r];
    const std::string folder = "run-" + std::to_string(run.index);
    stage->FolderFor(folder);
    AdoptOrWrite(earlier, folder + "/design.tsv", stage, &tasks, [&run](const std::string& path) {
      WriteFileAtomically(path, DesignToTsv(run.design));
    });
    AdoptOrWrite(earlier, folder + "/design.svg", stage, &tasks,
                 [&run, &plan](const std::string& path) {
                   WriteFileAtomically(path, RunDesignSvg(run, plan.spec->id));
                 });
    if (images) {
      AdoptOrWrite(
          earlier, folder + "/ar1.nii.gz", stage, &tasks,
          [&subject, r](const std::string& path) { WriteMap(subject, subject.runs[r].rho, path); });
      continue;
    }
    RegionTables tables;
    for (const ContrastOutcome& outcome : subject.contrasts) {
      const ContrastEstimate& estimate = outcome.per_run[r];
      if (!estimate.estimable) continue;
      AddRegionRows(*outcome.spec, estimate, TestContrast(estimate, outcome.spec->is_f), subject,
                    &subject.runs[r], &tables);
    }
    WriteRegionTables(tables, /*with_ar1=*/true, folder, stage);
  }

  RegionTables tables;
  for (const ContrastOutcome& outcome : subject.contrasts) {
    if (!outcome.estimable) continue;
    const std::string& name = outcome.spec->name;
    if (!images) {
      AddRegionRows(*outcome.spec, outcome.combined, outcome.test, subject, nullptr, &tables);
      continue;
    }
    if (outcome.files_kept) {
      for (const std::string& file : ContrastImageFiles(*outcome.spec)) {
        stage->Adopt(file, earlier + "/" + file);
      }
      continue;
    }
    // One task per map, from per-voxel values that live in `subject`.
    const auto map = [&](const Eigen::VectorXd& values, const std::string& file) {
      tasks.Add(
          [&subject, &values, path = stage->PathFor(file)] { WriteMap(subject, values, path); });
    };
    const auto first_row = [&](const Eigen::MatrixXd& values, const std::string& file) {
      tasks.Add([&subject, &values, path = stage->PathFor(file)] {
        WriteMap(subject, values.row(0).transpose(), path);
      });
    };
    if (!outcome.spec->is_f) {
      first_row(outcome.combined.effect, name + ".estimate.nii.gz");
      first_row(outcome.combined.covariance, name + ".variance.nii.gz");
      map(outcome.test.stat, name + ".t.nii.gz");
    } else {
      map(outcome.test.stat, name + ".f.nii.gz");
    }
    map(outcome.test.z, name + ".z.nii.gz");
  }
  if (images) {
    AdoptOrWrite(earlier, "mask.nii.gz", stage, &tasks, [&subject](const std::string& path) {
      ImageGeometry geometry = subject.geometry;
      geometry.n_volumes = 1;
      std::vector<float> mask(static_cast<size_t>(geometry.n_voxels()), 0.0f);
      for (size_t v = 0; v < subject.voxels.size(); ++v) {
        if (subject.valid[v]) mask[static_cast<size_t>(subject.voxels[v])] = 1.0f;
      }
      WriteImage(path, geometry, mask);
    });
  } else {
    WriteRegionTables(tables, /*with_ar1=*/false, "", stage);
  }
  AdoptOrWrite(earlier, "fit_params.bin", stage, &tasks, [&subject](const std::string& path) {
    WriteFileAtomically(path, SerializeFitRecord(subject.voxels, subject.runs));
  });
  tasks.Add([&spec, &subject, &fingerprint, path = stage->PathFor("summary.json")] {
    WriteFileAtomically(path, SummaryJson(spec, subject, fingerprint));
  });
  tasks.Run(subject.threads);
}

}  // namespace boldsum
