#include "study/run_plan.h"

#include <cmath>
#include <sstream>

namespace boldsum {
namespace {

bool EndsWith(const std::string& text, const std::string& suffix) {
  return text.size() >= suffix.size() &&
         text.compare(text.size() - suffix.size(), suffix.size(), suffix) == 0;
}

// The TR in the header may differ from the config's by rounding only.
constexpr double kTrTolerance = 0.01;

void ReadRunShape(const ModelSpec& model, RunPlan* run) {
  const std::string& path = run->spec->data_path;
  if (EndsWith(path, ".tsv")) {
    run->kind = DataKind::kRegions;
    run->regions = ReadNumericTable(path, /*allow_na=*/false);
    run->n_volumes = static_cast<int>(run->regions.values.rows());
    return;
  }
  if (!EndsWith(path, ".nii") && !EndsWith(path, ".nii.gz")) {
    throw Error(path + ": data must be a NIfTI image (.nii, .nii.gz) or an ROI table (.tsv)");
  }
  run->kind = DataKind::kImage;
  run->geometry = ReadImageGeometry(path);
  run->n_volumes = run->geometry.n_volumes;
  const double header_tr = run->geometry.tr_s;
  if (header_tr > 0 && std::abs(header_tr - model.tr_s) > kTrTolerance * model.tr_s) {
    std::ostringstream message;
    message << path << ": the header's TR is " << header_tr << " s but the config's tr is "
            << model.tr_s << " s (they may differ by at most 1%)";
    throw Error(message.str());
  }
}

}  // namespace

std::vector<const SubjectSpec*> SelectSubjects(const StudySpec& spec,
                                               const std::vector<std::string>& ids) {
  std::vector<const SubjectSpec*> selected;
  if (ids.empty()) {
    for (const SubjectSpec& subject : spec.subjects) selected.push_back(&subject);
    return selected;
  }
  std::vector<std::string> known;
  for (const SubjectSpec& subject : spec.subjects) known.push_back(subject.id);
  for (const SubjectSpec& subject : spec.subjects) {
    for (const std::string& id : ids) {
      if (subject.id == id) {
        selected.push_back(&subject);
        break;
      }
    }
  }
  for (const std::string& id : ids) {
    bool found = false;
    for (const std::string& name : known) found = found || name == id;
    if (!found) {
      const std::string guess = ClosestMatch(id, known);
      throw Error("--subject " + id + ": no such subject in " + spec.config_path +
                  (guess.empty() ? "" : " (did you mean '" + guess + "'?)"));
    }
  }
  return selected;
}

SubjectPlan PlanSubject(const StudySpec& spec, const SubjectSpec& subject,
                        Diagnostics* diagnostics) {
  SubjectPlan plan;
  plan.spec = &subject;
  int index = 0;
  for (const RunSpec& run_spec : subject.runs) {
    RunPlan run;
    run.index = ++index;
    run.spec = &run_spec;
    try {
      ReadRunShape(spec.model, &run);
      const ConfoundTable confounds = LoadConfounds(spec.model, run_spec);
      run.design = BuildDesign(spec.model, run_spec, confounds, run.n_volumes, &run.warnings);
    } catch (const Error& error) {
      diagnostics->AddError(run_spec.where, "subject " + subject.id + ", run " +
                                                std::to_string(run.index) + ": " + error.what());
      continue;
    }
    diagnostics->Append(run.warnings);
    plan.runs.push_back(std::move(run));
  }
  if (!plan.runs.empty()) {
    plan.kind = plan.runs.front().kind;
    for (const RunPlan& run : plan.runs) {
      if (run.kind != plan.kind) {
        diagnostics->AddError(run.spec->where,
                              "subject " + subject.id +
                                  ": runs mix NIfTI images and ROI tables; a subject's runs "
                                  "must all be of one kind");
      } else if (run.kind == DataKind::kImage &&
                 !run.geometry.SameSpace(plan.runs.front().geometry)) {
        diagnostics->AddError(run.spec->where,
                              "subject " + subject.id + ", run " + std::to_string(run.index) +
                                  ": image grid or orientation differs from run 1");
      } else if (run.kind == DataKind::kRegions &&
                 run.regions.names != plan.runs.front().regions.names) {
        diagnostics->AddError(run.spec->where,
                              "subject " + subject.id + ", run " + std::to_string(run.index) +
                                  ": ROI table columns differ from run 1's");
      }
    }
  }
  return plan;
}

std::string OutputRoot(const StudySpec& spec, const StudyOptions& options) {
  return options.output_dir.empty() ? spec.output_dir : options.output_dir;
}

}  // namespace boldsum
