// The parts of LoadConfig, one per section of the document. Each reads its fields
// through a YamlReader, fills its part of the StudySpec and reports every problem.
#pragma once

#include <map>
#include <string>
#include <vector>

#include "boldsum/config.h"
#include "config/reader.h"

namespace boldsum::config {

// What the later sections need to know about how much of the model could be read.
struct ModelState {
  bool has_tr = false;          // tr read and valid
  bool has_conditions = false;  // conditions read (their valid entries are in the model)
  bool has_confounds = true;    // confounds and censor read (or absent)
};

// tr, slice_reference, hrf, drift, autocorrelation, conditions, ignore, confounds, censor.
ModelState ReadModel(YamlReader& reader, const std::map<std::string, Field>& top, ModelSpec* model);

// FIR bins per condition: hrf.fir_bins, or enough bins of width hrf.fir_bin_s (default
// one TR) to cover 24 s; 0 when the TR is unknown.
int FirBinCount(const ModelSpec& model);

// The task columns of the design in naming.md order, each with its condition:
// "<cond>", "<cond>_dt", "<cond>_disp", or "<cond>_bin1".."<cond>_binK".
std::vector<std::pair<std::string, std::string>> TaskColumns(const ModelSpec& model);

// contrasts: t (a mapping of weights) and F (a list of mappings), keys checked
// against the model's conditions and column names.
std::vector<ContrastSpec> ReadContrasts(YamlReader& reader, const Field& field,
                                        const ModelSpec& model, const ModelState& state);

// subjects: ids, runs, file existence, events (TSV or inline), confounds headers.
std::vector<SubjectSpec> ReadSubjects(YamlReader& reader, const Field& field,
                                      const ModelSpec& model, const ModelState& state);

// subjects_from: subjects and runs found in a BIDS dataset (see bids_discovery.h), their
// events validated like listed ones. `report` gets the discovery report lines.
std::vector<SubjectSpec> ReadSubjectsFrom(YamlReader& reader, const Field& field,
                                          const ModelSpec& model, const ModelState& state,
                                          std::vector<std::string>* report);

// What the model takes from confounds tables ("confounds (a, b) and censoring (c)"); ""
// when it takes nothing.
std::string NeedsConfounds(const ModelSpec& model);
// Reports every column the model takes that the table at `path` lacks, at the header.
void CheckConfoundsHeader(YamlReader& reader, const ResolvedPath& path,
                          const SourceLocation& anchor, const ModelSpec& model);

}  // namespace boldsum::config
