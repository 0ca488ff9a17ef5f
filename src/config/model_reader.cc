// The model section of the config: timing, HRF, drift, noise, conditions, confounds.
#include <algorithm>
#include <cmath>
#include <optional>
#include <set>

#include "config/readers.h"

namespace boldsum::config {
namespace {

const std::vector<Choice<HrfShape>> kHrfShapes = {{"double-gamma", HrfShape::kDoubleGamma},
                                                  {"glover", HrfShape::kGlover},
                                                  {"fir", HrfShape::kFir}};
const std::vector<Choice<HrfDerivatives>> kHrfDerivatives = {
    {"none", HrfDerivatives::kNone},
    {"time", HrfDerivatives::kTime},
    {"time+dispersion", HrfDerivatives::kTimeDispersion}};
const std::vector<Choice<DriftKind>> kDriftKinds = {{"cosine", DriftKind::kCosine},
                                                    {"polynomial", DriftKind::kPolynomial},
                                                    {"none", DriftKind::kNone}};
const std::vector<Choice<NoiseModel>> kNoiseModels = {{"ar1", NoiseModel::kAr1},
                                                      {"none", NoiseModel::kNone}};

constexpr double kFirCoverS = 24.0;  // default FIR span after onset (common practice)
constexpr int kMaxPolynomialDegree = 10;

const Field* Find(const std::map<std::string, Field>& fields, const std::string& name) {
  const auto it = fields.find(name);
  return it == fields.end() ? nullptr : &it->second;
}

// A list of distinct names; reports wrong types, bad characters, reserved names and
// repeats. Returns the items that were read, with their fields.
std::optional<std::vector<std::pair<std::string, Field>>> ReadNames(YamlReader& reader,
                                                                    const Field& field,
                                                                    const std::string& what,
                                                                    bool design_column) {
  const std::optional<std::vector<Field>> items = reader.Items(field, "a list of " + what + "s");
  if (!items) return std::nullopt;
  std::vector<std::pair<std::string, Field>> names;
  std::map<std::string, int> first_line;
  for (const Field& item : *items) {
    const std::optional<std::string> name = reader.Text(item, "a " + what);
    if (!name) continue;
    if (name->find_first_of("\t\n\r") != std::string::npos) {
      reader.Error(item, "'" + *name + "' contains a tab or line break");
      continue;
    }
    if (design_column &&
        (*name == "intercept" || name->rfind("drift_", 0) == 0 || name->rfind("censor_", 0) == 0)) {
      reader.Error(item, "'" + *name +
                             "' is reserved for columns boldsum adds (intercept, drift_*, "
                             "censor_*)");
      continue;
    }
    const auto [first, inserted] = first_line.emplace(*name, reader.At(item).line);
    if (!inserted) {
      reader.Error(item, "'" + *name + "' is listed twice (first at line " +
                             std::to_string(first->second) + ")");
      continue;
    }
    names.emplace_back(*name, item);
  }
  return names;
}

void ReadHrf(YamlReader& reader, const Field& field, HrfSpec* hrf) {
  const auto fields = reader.Fields(field, HrfKeys());
  if (!fields) return;
  if (const Field* f = Find(*fields, "shape")) {
    if (auto shape = reader.OneOf(*f, kHrfShapes)) hrf->shape = *shape;
  }
  const bool is_fir = hrf->shape == HrfShape::kFir;
  if (const Field* f = Find(*fields, "derivatives")) {
    if (auto derivatives = reader.OneOf(*f, kHrfDerivatives)) {
      if (is_fir && *derivatives != HrfDerivatives::kNone) {
        reader.Error(*f,
                     "derivatives cannot be combined with shape fir (an FIR basis has no "
                     "HRF to differentiate)");
      } else {
        hrf->derivatives = *derivatives;
      }
    }
  }
  if (const Field* f = Find(*fields, "fir_bin_s")) {
    if (!is_fir) {
      reader.Error(*f, "only used with shape fir");
    } else if (auto width = reader.Number(*f, "a bin width in seconds")) {
      if (*width > 0) {
        hrf->fir_bin_s = *width;
      } else {
        reader.Error(*f, "must be > 0 seconds, got " + f->value.Scalar());
      }
    }
  }
  if (const Field* f = Find(*fields, "fir_bins")) {
    if (!is_fir) {
      reader.Error(*f, "only used with shape fir");
    } else if (auto bins = reader.Integer(*f, "a whole number of bins")) {
      if (*bins >= 1 && *bins <= 1000) {
        hrf->fir_bins = static_cast<int>(*bins);
      } else {
        reader.Error(*f, "must be in 1..1000, got " + f->value.Scalar());
      }
    }
  }
}

void ReadDrift(YamlReader& reader, const Field& field, DriftSpec* drift) {
  const auto fields = reader.Fields(field, DriftKeys());
  if (!fields) return;
  if (const Field* f = Find(*fields, "kind")) {
    if (auto kind = reader.OneOf(*f, kDriftKinds)) drift->kind = *kind;
  }
  const std::string kind_word = drift->kind == DriftKind::kCosine       ? "cosine"
                                : drift->kind == DriftKind::kPolynomial ? "polynomial"
                                                                        : "none";
  if (const Field* f = Find(*fields, "cutoff_s")) {
    if (drift->kind != DriftKind::kCosine) {
      reader.Error(*f, "only used with kind cosine (kind is " + kind_word + ")");
    } else if (auto cutoff = reader.Number(*f, "a number in seconds")) {
      if (*cutoff > 0) {
        drift->cutoff_s = *cutoff;
      } else {
        reader.Error(*f, "must be > 0 seconds, got " + f->value.Scalar());
      }
    }
  }
  if (const Field* f = Find(*fields, "degree")) {
    if (drift->kind != DriftKind::kPolynomial) {
      reader.Error(*f, "only used with kind polynomial (kind is " + kind_word + ")");
    } else if (auto degree = reader.Integer(*f, "a whole number")) {
      if (*degree >= 1 && *degree <= kMaxPolynomialDegree) {
        drift->degree = static_cast<int>(*degree);
      } else {
        reader.Error(*f, "must be in 1.." + std::to_string(kMaxPolynomialDegree) + ", got " +
                             f->value.Scalar());
      }
    }
  }
}

void ReadCensor(YamlReader& reader, const Field& field, ModelSpec* model, ModelState* state) {
  const auto fields = reader.Fields(field, CensorKeys());
  if (!fields) {
    state->has_confounds = false;
    return;
  }
  CensorSpec censor;
  bool ok = fields->size() == CensorKeys().keys.size();
  if (const Field* f = Find(*fields, "column")) {
    const auto column = reader.Text(*f, "a confounds column name");
    if (column) censor.column = *column;
    ok = ok && column.has_value();
  }
  if (const Field* f = Find(*fields, "above")) {
    const auto above = reader.Number(*f, "a number (the censoring threshold)");
    if (above && *above <= 0) reader.Error(*f, "must be > 0, got " + f->value.Scalar());
    ok = ok && above && *above > 0;
    if (above) censor.above = *above;
  }
  if (ok) {
    model->censor = censor;
  } else {
    state->has_confounds = false;
  }
}

// Task and confound columns must have distinct names in every run's design.
void CheckColumnClashes(YamlReader& reader, const ModelSpec& model,
                        const std::map<std::string, Field>& condition_fields,
                        const std::map<std::string, Field>& confound_fields) {
  std::map<std::string, std::string> owner;  // column -> condition
  for (const auto& [column, condition] : TaskColumns(model)) {
    const auto [first, inserted] = owner.emplace(column, condition);
    if (!inserted) {
      reader.Error(condition_fields.at(condition),
                   "condition '" + condition + "' gives design column '" + column +
                       "', which condition '" + first->second +
                       "' also gives; design column names must be unique");
    }
  }
  for (const auto& [name, field] : confound_fields) {
    const auto it = owner.find(name);
    if (it != owner.end()) {
      reader.Error(field, "'" + name + "' is also a design column of condition '" + it->second +
                              "'; design column names must be unique");
    }
  }
}

}  // namespace

int FirBinCount(const ModelSpec& model) {
  if (model.hrf.fir_bins > 0) return model.hrf.fir_bins;
  const double width = model.hrf.fir_bin_s > 0 ? model.hrf.fir_bin_s : model.tr_s;
  if (!(width > 0)) return 0;
  // The 1e-9 guard keeps 24 / 0.3 = 80.00000000000001 at 80 bins.
  return std::max(1, static_cast<int>(std::ceil(kFirCoverS / width - 1e-9)));
}

std::vector<std::pair<std::string, std::string>> TaskColumns(const ModelSpec& model) {
  std::vector<std::pair<std::string, std::string>> columns;
  const int bins = FirBinCount(model);
  for (const std::string& condition : model.conditions) {
    if (model.hrf.shape == HrfShape::kFir) {
      for (int k = 1; k <= bins; ++k) {
        columns.emplace_back(condition + "_bin" + std::to_string(k), condition);
      }
      continue;
    }
    columns.emplace_back(condition, condition);
    if (model.hrf.derivatives != HrfDerivatives::kNone) {
      columns.emplace_back(condition + "_dt", condition);
    }
    if (model.hrf.derivatives == HrfDerivatives::kTimeDispersion) {
      columns.emplace_back(condition + "_disp", condition);
    }
  }
  return columns;
}

ModelState ReadModel(YamlReader& reader, const std::map<std::string, Field>& top,
                     ModelSpec* model) {
  ModelState state;
  if (const Field* f = Find(top, "tr")) {
    if (auto tr = reader.Number(*f, "a number in seconds")) {
      if (*tr > 0) {
        model->tr_s = *tr;
        state.has_tr = true;
      } else {
        reader.Error(*f, "must be > 0 seconds, got " + f->value.Scalar());
      }
    }
  }
  if (const Field* f = Find(top, "slice_reference")) {
    if (auto reference = reader.Number(*f, "a number in [0, 1]")) {
      if (*reference >= 0 && *reference <= 1) {
        model->slice_reference = *reference;
      } else {
        reader.Error(*f, "must be in [0, 1], got " + f->value.Scalar());
      }
    }
  }
  if (const Field* f = Find(top, "hrf")) ReadHrf(reader, *f, &model->hrf);
  if (const Field* f = Find(top, "drift")) ReadDrift(reader, *f, &model->drift);
  if (const Field* f = Find(top, "autocorrelation")) {
    if (auto noise = reader.OneOf(*f, kNoiseModels)) model->noise = *noise;
  }

  std::map<std::string, Field> condition_fields;
  if (const Field* f = Find(top, "conditions")) {
    if (auto names = ReadNames(reader, *f, "condition name", true)) {
      state.has_conditions = true;
      if (f->value.size() == 0) reader.Error(*f, "must name at least one condition");
      for (const auto& [name, item] : *names) {
        model->conditions.push_back(name);
        condition_fields.emplace(name, item);
      }
    }
  }
  if (const Field* f = Find(top, "ignore")) {
    if (auto names = ReadNames(reader, *f, "trial type", false)) {
      for (const auto& [name, item] : *names) {
        if (condition_fields.count(name) != 0) {
          reader.Error(item, "'" + name + "' is also listed under conditions");
        } else {
          model->ignored.push_back(name);
        }
      }
    }
  }
  std::map<std::string, Field> confound_fields;
  if (const Field* f = Find(top, "confounds")) {
    if (auto names = ReadNames(reader, *f, "confounds column name", true)) {
      for (const auto& [name, item] : *names) {
        model->confounds.push_back(name);
        confound_fields.emplace(name, item);
      }
    } else {
      state.has_confounds = false;
    }
  }
  if (const Field* f = Find(top, "censor")) ReadCensor(reader, *f, model, &state);
  CheckColumnClashes(reader, *model, condition_fields, confound_fields);
  return state;
}

}  // namespace boldsum::config
