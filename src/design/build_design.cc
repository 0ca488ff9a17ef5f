// BuildDesign and DesignMatrix::names (declared in boldsum/design.h). Column names and
// order are fixed project-wide: per condition <cond> [<cond>_dt] [<cond>_disp] or
// <cond>_bin1..K; confounds by their TSV names; censor_<k>; drift_cos<j> or drift_poly<d>;
// intercept.
#include <algorithm>
#include <cmath>
#include <map>
#include <sstream>
#include <string>

#include "boldsum/design.h"
#include "design/drift.h"
#include "events/event_regressor.h"

namespace boldsum {
namespace {

std::string FormatSeconds(double seconds) {
  std::ostringstream text;
  text.precision(6);
  text << seconds;
  return text.str();
}

void AppendColumns(DesignMatrix* design, const Eigen::MatrixXd& values,
                   std::vector<DesignColumn> columns) {
  if (values.cols() == 0) return;
  const Eigen::Index start = design->x.cols();
  design->x.conservativeResize(design->x.rows(), start + values.cols());
  design->x.middleCols(start, values.cols()) = values;
  for (DesignColumn& column : columns) design->columns.push_back(std::move(column));
}

// Warnings about one condition's events in this run. The last modelled time is
// t_{N-1} = (N - 1 + slice_reference) TR: an event with a later onset cannot change any
// volume's value (the HRF is causal and vanishes at 0; an FIR bin needs t_k >= onset).
void WarnAboutEvents(const std::string& condition, const std::vector<Event>& events,
                     const ModelSpec& model, int n_volumes, const RunSpec& run,
                     Diagnostics* warnings) {
  if (warnings == nullptr) return;
  if (events.empty()) {
    warnings->AddWarning(run.where, "condition '" + condition +
                                        "' has no events in this run; its regressors are all "
                                        "zero and the fit drops them as not estimable");
    return;
  }
  const double last_time = (n_volumes - 1 + model.slice_reference) * model.tr_s;
  int late = 0;
  double first_late = 0.0;
  for (const Event& event : events) {
    if (event.onset_s > last_time) {
      if (late == 0 || event.onset_s < first_late) first_late = event.onset_s;
      ++late;
    }
  }
  if (late == 0) return;
  std::string message = "condition '" + condition + "': " + std::to_string(late) + " of " +
                        std::to_string(events.size()) + " events start after the last volume's " +
                        "modelled time " + FormatSeconds(last_time) + " s ((N - 1 + " +
                        "slice_reference) * TR, N = " + std::to_string(n_volumes) +
                        "), the earliest at " + FormatSeconds(first_late) +
                        " s; they do not affect this run";
  if (late == static_cast<int>(events.size())) {
    message += ", so the condition's regressors are all zero";
  }
  warnings->AddWarning(run.where, message);
}

void AddTaskColumns(const ModelSpec& model, const RunSpec& run, int n_volumes, DesignMatrix* design,
                    Diagnostics* warnings) {
  static const std::vector<Event> kNoEvents;
  for (const std::string& condition : model.conditions) {
    const auto found = run.events.find(condition);
    const std::vector<Event>& events = found == run.events.end() ? kNoEvents : found->second;
    WarnAboutEvents(condition, events, model, n_volumes, run, warnings);
    std::vector<DesignColumn> columns;
    Eigen::MatrixXd values;
    try {
      if (model.hrf.shape == HrfShape::kFir) {
        values = FirRegressors(events, model.hrf, model.tr_s, model.slice_reference, n_volumes);
        for (int b = 1; b <= values.cols(); ++b) {
          columns.push_back(
              {condition + "_bin" + std::to_string(b), ColumnKind::kFirBin, condition});
        }
      } else {
        values =
            ConvolvedRegressors(events, model.hrf, model.tr_s, model.slice_reference, n_volumes);
        columns.push_back({condition, ColumnKind::kCondition, condition});
        if (values.cols() > 1) {
          columns.push_back({condition + "_dt", ColumnKind::kTimeDerivative, condition});
        }
        if (values.cols() > 2) {
          columns.push_back({condition + "_disp", ColumnKind::kDispersionDerivative, condition});
        }
      }
    } catch (const Error& error) {
      throw Error(run.where, "condition '" + condition + "': " + error.what());
    }
    AppendColumns(design, values, std::move(columns));
  }
}

void AddConfoundColumns(const ModelSpec& model, const ConfoundTable& confounds, int n_volumes,
                        DesignMatrix* design) {
  if (model.confounds.empty() && !model.censor) return;
  const SourceLocation file{confounds.path, 0, 0};
  auto check_rows = [&](Eigen::Index rows) {
    if (rows != n_volumes) {
      throw Error(file, "the confounds table has " + std::to_string(rows) +
                            " data rows but the run has " + std::to_string(n_volumes) +
                            " volumes; it needs one row per volume");
    }
  };
  if (!model.confounds.empty()) {
    if (confounds.names != model.confounds ||
        confounds.values.cols() != static_cast<Eigen::Index>(model.confounds.size())) {
      throw Error(file, "the confounds table was not loaded for this model's confound columns");
    }
    check_rows(confounds.values.rows());
    std::vector<DesignColumn> columns;
    for (const std::string& name : model.confounds) {
      columns.push_back({name, ColumnKind::kConfound, ""});
    }
    AppendColumns(design, confounds.values, std::move(columns));
  }
  if (model.censor) {
    check_rows(confounds.censor_signal.size());
    std::vector<int> censored;
    for (int k = 0; k < n_volumes; ++k) {
      if (confounds.censor_signal(k) > model.censor->above) censored.push_back(k);
    }
    Eigen::MatrixXd values = Eigen::MatrixXd::Zero(n_volumes, static_cast<int>(censored.size()));
    std::vector<DesignColumn> columns;
    for (size_t i = 0; i < censored.size(); ++i) {
      values(censored[i], static_cast<int>(i)) = 1.0;
      columns.push_back({"censor_" + std::to_string(censored[i]), ColumnKind::kCensor, ""});
    }
    AppendColumns(design, values, std::move(columns));
  }
}

void AddDriftColumns(const ModelSpec& model, const RunSpec& run, int n_volumes,
                     DesignMatrix* design, Diagnostics* warnings) {
  std::vector<DesignColumn> columns;
  Eigen::MatrixXd values;
  if (model.drift.kind == DriftKind::kCosine) {
    if (!(model.drift.cutoff_s > 0.0)) {
      throw Error(run.where, "cosine drift cutoff must be positive, got " +
                                 FormatSeconds(model.drift.cutoff_s) + " s");
    }
    bool capped = false;
    const int count = CosineDriftCount(n_volumes, model.tr_s, model.drift.cutoff_s, &capped);
    if (capped && warnings != nullptr) {
      warnings->AddWarning(run.where, "cosine drift cutoff " + FormatSeconds(model.drift.cutoff_s) +
                                          " s asks for more regressors than the run's " +
                                          std::to_string(n_volumes) + " volumes allow; using " +
                                          std::to_string(count));
    }
    values = CosineDrift(n_volumes, count);
    for (int j = 1; j <= count; ++j) {
      columns.push_back({"drift_cos" + std::to_string(j), ColumnKind::kDrift, ""});
    }
  } else if (model.drift.kind == DriftKind::kPolynomial) {
    if (model.drift.degree < 0) {
      throw Error(run.where, "polynomial drift degree must be >= 0, got " +
                                 std::to_string(model.drift.degree));
    }
    const int degree = std::min(model.drift.degree, n_volumes - 1);
    if (degree < model.drift.degree && warnings != nullptr) {
      warnings->AddWarning(run.where, "polynomial drift degree " +
                                          std::to_string(model.drift.degree) + " is too high for " +
                                          std::to_string(n_volumes) + " volumes; using " +
                                          std::to_string(degree));
    }
    values = LegendreDrift(n_volumes, degree);
    for (int d = 1; d <= degree; ++d) {
      columns.push_back({"drift_poly" + std::to_string(d), ColumnKind::kDrift, ""});
    }
  }
  AppendColumns(design, values, std::move(columns));
}

void CheckUniqueNames(const DesignMatrix& design, const RunSpec& run) {
  std::map<std::string, int> seen;
  for (int c = 0; c < design.n_columns(); ++c) {
    const auto [it, inserted] = seen.emplace(design.columns[c].name, c);
    if (!inserted) {
      throw Error(run.where, "design column name '" + design.columns[c].name +
                                 "' is produced twice (columns " + std::to_string(it->second + 1) +
                                 " and " + std::to_string(c + 1) +
                                 "); rename the condition or confound");
    }
  }
}

}  // namespace

std::vector<std::string> DesignMatrix::names() const {
  std::vector<std::string> list;
  for (const DesignColumn& column : columns) list.push_back(column.name);
  return list;
}

DesignMatrix BuildDesign(const ModelSpec& model, const RunSpec& run, const ConfoundTable& confounds,
                         int n_volumes, Diagnostics* warnings) {
  if (n_volumes < 1) {
    throw Error(run.where,
                "the run has " + std::to_string(n_volumes) + " volumes; need at least 1");
  }
  if (!(model.tr_s > 0.0) || !std::isfinite(model.tr_s)) {
    throw Error(run.where,
                "TR must be a positive number of seconds, got " + FormatSeconds(model.tr_s));
  }
  if (!(model.slice_reference >= 0.0 && model.slice_reference <= 1.0)) {
    throw Error(run.where,
                "slice_reference must lie in [0, 1], got " + FormatSeconds(model.slice_reference));
  }
  if (model.hrf.shape == HrfShape::kFir && model.hrf.derivatives != HrfDerivatives::kNone) {
    throw Error(run.where, "HRF derivatives cannot be combined with the FIR basis");
  }
  DesignMatrix design;
  design.x.resize(n_volumes, 0);
  AddTaskColumns(model, run, n_volumes, &design, warnings);
  AddConfoundColumns(model, confounds, n_volumes, &design);
  AddDriftColumns(model, run, n_volumes, &design, warnings);
  AppendColumns(&design, Eigen::MatrixXd::Ones(n_volumes, 1),
                {{"intercept", ColumnKind::kIntercept, ""}});
  CheckUniqueNames(design, run);
  return design;
}

}  // namespace boldsum
