// The first level of one subject in memory: every run fitted, every contrast
// estimated per run and combined across runs by fixed effects.
#pragma once

#include <cstdint>
#include <string>
#include <vector>

#include "boldsum/combine.h"
#include "boldsum/fit.h"
#include "study/run_plan.h"

namespace boldsum {

struct ContrastOutcome {
  const ContrastSpec* spec = nullptr;
  std::vector<Eigen::MatrixXd> weights;      // per run (q x p over that run's columns)
  std::vector<ContrastEstimate> per_run;     // per run; estimable == false if not
  std::vector<int> runs_used;                // 1-based run indices
  std::vector<int> runs_left_out;
  bool estimable = false;                    // in at least one run
  ContrastEstimate combined;                 // over runs_used
  ContrastTest test;                         // t or F of `combined`, and z
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
  std::vector<unsigned char> valid;          // per voxel: valid in every run
  Diagnostics warnings;                      // design warnings and left-out runs
};

// The automatic mask of an image: voxels of the first volume that are finite and above
// 20% of the 98th percentile of the first volume's finite values.
std::vector<int64_t> AutomaticMask(const std::string& image_path);

// Fits a planned subject. Throws Error when a run cannot be read or fitted.
SubjectFit FitSubject(const StudySpec& spec, SubjectPlan plan, int threads);

}  // namespace boldsum
