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
void WriteSubjectOutputs(const StudySpec& spec, const SubjectFit& subject,
                         const SubjectFingerprint& fingerprint, OutputStage* stage);

// "design.tsv" and "design.svg" of a run, under run-<k>/ of `stage` or any folder.
void WriteRunDesign(const RunPlan& run, const std::string& subject_id,
                    const std::string& folder);

// A number as TSV text: shortest round-trip form, `n/a` for NaN.
std::string TsvNumber(double value);

}  // namespace boldsum
