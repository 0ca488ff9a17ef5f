// Writes a fitted subject's files (see README "Outputs"): per run the design and the
// AR(1) map or ROI tables; per subject the contrast images or tables, the mask and
// summary.json.
#pragma once

#include <string>

#include "study/fingerprint.h"
#include "study/output_stage.h"
#include "study/subject_fit.h"

namespace boldsum {

// Also writes fit_params.bin (the saved fit) and records `fingerprint` in summary.json.
// Everything written is a function of the fingerprinted inputs and the contrasts, so a
// re-run that recomputes or skips gives the same bytes as a clean fit.
// `earlier` (optional) is the subject's folder of an earlier run with the same
// fingerprint (only contrasts changed): the files that do not depend on the contrasts
// (per run design and AR(1) map, mask, fit_params.bin) and the files of contrasts with
// files_kept are taken over from it instead of being encoded again. Files are written by
// up to subject.threads threads at once.
void WriteSubjectOutputs(const StudySpec& spec, const SubjectFit& subject,
                         const SubjectFingerprint& fingerprint, OutputStage* stage,
                         const std::string& earlier = "");

// The image files of a contrast, relative to the subject folder: <name>.estimate,
// .variance, .t (t) or .f (F), and .z, each .nii.gz.
std::vector<std::string> ContrastImageFiles(const ContrastSpec& contrast);

// What a contrast's output files depend on besides the saved fit: its type and its
// weights over each run's named design columns. summary.json records it per contrast
// as "outputs_key" (SHA-256 hex), so equal keys under an unchanged fingerprint mean
// byte-identical files.
std::string ContrastOutputsKey(const ContrastOutcome& outcome, const SubjectPlan& plan);

// "design.tsv" and "design.svg" of a run, under run-<k>/ of `stage` or any folder.
void WriteRunDesign(const RunPlan& run, const std::string& subject_id, const std::string& folder);

// A number as TSV text: shortest round-trip form, `n/a` for NaN.
std::string TsvNumber(double value);

}  // namespace boldsum
