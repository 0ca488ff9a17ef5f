// The first level of one subject in memory: every run fitted, every contrast
// estimated per run and combined across runs by fixed effects.
#pragma once

#include <cstdint>
#include <functional>
#include <string>
#include <vector>

#include "boldsum/combine.h"
#include "boldsum/fit.h"
#include "study/fit_record.h"
#include "study/run_plan.h"

namespace boldsum {

struct ContrastOutcome {
  const ContrastSpec* spec = nullptr;
  std::vector<Eigen::MatrixXd> weights;   // per run (q x p over that run's columns)
  std::vector<ContrastEstimate> per_run;  // per run; estimable == false if not
  std::vector<int> runs_used;             // 1-based run indices
  std::vector<int> runs_left_out;
  bool estimable = false;     // in at least one run
  ContrastEstimate combined;  // over runs_used
  ContrastTest test;          // t or F of `combined`, and z; empty when
                              // files_kept
  bool files_kept = false;    // its files are taken over unchanged from the subject's
                              // earlier outputs; then per_run and combined hold only q,
                              // dof and estimable (no per-voxel values)
};

struct SubjectFit {
  SubjectPlan plan;
  // Images: the voxels fitted (linear indices into the grid), the grid, and which of
  // them ended valid in every run. ROI tables: one "voxel" per region.
  std::vector<int64_t> voxels;
  ImageGeometry geometry;
  std::vector<std::string> regions;
  std::vector<RunFit> runs;
  std::vector<ContrastOutcome> contrasts;
  std::vector<unsigned char> valid;  // per voxel: valid in every run
  Diagnostics warnings;              // runs left out of contrasts (design
                                     // warnings stay with plan.runs)
  int threads = 1;                   // threads given for this subject (fit, outputs)
};

// Called with the volumes read so far (cumulative over the subject's runs); throwing
// from it (e.g. on Ctrl-C) abandons the fit.
using VolumeCallback = std::function<void(int64_t volumes_read)>;

// The automatic mask of an image: voxels of the first volume that are finite and above
// 20% of the 98th percentile of the first volume's finite values.
std::vector<int64_t> AutomaticMask(const std::string& image_path);

// Fits a planned subject. Throws Error when a run cannot be read or fitted.
SubjectFit FitSubject(const StudySpec& spec, SubjectPlan plan, int threads,
                      const VolumeCallback& on_volumes);

// The subject from a saved fit, with contrasts evaluated anew: bitwise the same as
// FitSubject on the same inputs, without reading the data. Throws Error when the record
// does not match the plan (run count, design width, voxel count).
// `keep_files` (optional) is asked for each contrast once its weights are known; when it
// says yes, files_kept is set and no per-voxel value of the contrast is computed (the
// caller takes its files over from earlier outputs of the same fit and weights).
using KeepContrastFiles = std::function<bool(const ContrastOutcome&, const SubjectPlan&)>;
SubjectFit RefitContrasts(const StudySpec& spec, SubjectPlan plan, FitRecord record, int threads,
                          const KeepContrastFiles& keep_files = nullptr);

}  // namespace boldsum
