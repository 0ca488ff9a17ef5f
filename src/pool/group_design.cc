#include "pool/group_design.h"

#include <algorithm>
#include <cctype>
#include <set>

#include "boldsum/io.h"
#include "pool/pool_inputs.h"

namespace boldsum {
namespace {

bool IsPlainName(const std::string& name) {
  return !name.empty() && std::all_of(name.begin(), name.end(), [](char c) {
    return std::isalnum(static_cast<unsigned char>(c)) || c == '_' || c == '-';
  });
}

std::string Quoted(const std::vector<std::string>& names) {
  std::string text;
  for (const std::string& name : names) text += (text.empty() ? "'" : ", '") + name + "'";
  return text;
}

// Rows of the participants table for each subject (-1 when absent), with errors for
// absent subjects and for ids that appear twice.
std::vector<int> MatchParticipants(const Table& table, int id_column,
                                   const std::vector<std::string>& subjects,
                                   const SourceLocation& where, Diagnostics* diagnostics) {
  std::map<std::string, int> rows;
  for (int r = 0; r < static_cast<int>(table.rows.size()); ++r) {
    const std::string& id = table.rows[r][id_column];
    const auto [it, added] = rows.emplace(SubjectKey(id), r);
    if (!added) {
      diagnostics->AddError(table.CellLocation(r, id_column),
                            "participant '" + id + "' appears twice (also on line " +
                                std::to_string(it->second + 2) + ")");
    }
  }
  std::vector<int> matched;
  for (const std::string& subject : subjects) {
    const auto it = rows.find(SubjectKey(subject));
    if (it == rows.end()) {
      diagnostics->AddError(where, "subject '" + subject + "' of the input is not in " +
                                       table.path + " (participant_id is matched with or "
                                       "without the 'sub-' prefix)");
      matched.push_back(-1);
    } else {
      matched.push_back(it->second);
    }
  }
  return matched;
}

}  // namespace

bool BuildGroupDesign(const DesignRequest& request, const std::vector<std::string>& subjects,
                      GroupDesign* design, Diagnostics* diagnostics) {
  const int errors_before = diagnostics->ErrorCount();
  *design = GroupDesign();
  design->intercept = request.intercept;
  const int n = static_cast<int>(subjects.size());
  const bool needs_table = !request.covariates.empty() || !request.factor_column.empty();
  if (needs_table && request.participants_path.empty()) {
    diagnostics->AddError(request.where,
                          "covariates and factors are read from a participants table; "
                          "give its path under 'participants'");
    return false;
  }
  if (request.factor_column.empty() && !request.intercept && request.covariates.empty()) {
    diagnostics->AddError(request.where, "the design has no columns (intercept: false, no "
                                         "covariates, no factor)");
    return false;
  }
  if (!request.factor_column.empty()) {
    if (request.coding == FactorCoding::kDifferences && !request.intercept) {
      diagnostics->AddError(request.factor_where,
                            "coding 'differences' needs 'intercept: true'; without an "
                            "intercept use coding 'cell_means'");
    } else if (request.coding == FactorCoding::kCellMeans && request.intercept) {
      diagnostics->AddError(request.factor_where,
                            "coding 'cell_means' has one column per level, which together "
                            "equal the intercept; set 'intercept: false' or use 'differences'");
    }
  }
  Table table;
  std::vector<int> rows(n, -1);
  if (!request.participants_path.empty()) {
    try {
      table = ReadTable(request.participants_path);
    } catch (const Error& e) {
      diagnostics->AddError(e.where().file.empty() ? request.participants_where : e.where(),
                            e.what());
      return false;
    }
    const int id_column = table.ColumnIndex("participant_id");
    if (id_column < 0) {
      diagnostics->AddError({table.path, 1, 0}, "no 'participant_id' column (BIDS "
                                                "participants table)");
      return false;
    }
    rows = MatchParticipants(table, id_column, subjects, request.participants_where,
                             diagnostics);
  }
  if (diagnostics->ErrorCount() > errors_before) return false;

  std::vector<Eigen::VectorXd> columns;
  if (request.intercept) {
    design->columns.push_back("intercept");
    columns.push_back(Eigen::VectorXd::Ones(n));
  }
  for (const DesignRequest::Covariate& covariate : request.covariates) {
    const int column = table.ColumnIndex(covariate.column);
    if (column < 0) {
      const std::string close = ClosestMatch(covariate.column, table.header);
      diagnostics->AddError(covariate.where,
                            "covariate '" + covariate.column + "' is not a column of " +
                                table.path + (close.empty() ? "" : "; did you mean '" + close +
                                                                       "'?"));
      continue;
    }
    if (!IsPlainName(covariate.column) || covariate.column == "intercept") {
      diagnostics->AddError(covariate.where,
                            "covariate name '" + covariate.column + "' cannot be a design "
                            "column name (letters, digits, _ and - only; not 'intercept')");
    }
    Eigen::VectorXd values(n);
    for (int i = 0; i < n; ++i) {
      const std::string& cell = table.rows[rows[i]][column];
      if (!ParseNumber(cell, &values[i])) {
        diagnostics->AddError(table.CellLocation(rows[i], column),
                              "covariate '" + covariate.column + "' of subject '" +
                                  subjects[i] + "': expected a finite number, got '" + cell +
                                  "' (every subject of the input needs a value)");
      }
    }
    CovariateSpec spec{covariate.column, covariate.centre, 0.0};
    if (covariate.centre) {
      spec.mean = values.mean();
      values.array() -= spec.mean;
    }
    design->covariates.push_back(spec);
    design->columns.push_back(covariate.column);
    columns.push_back(values);
  }
  if (!request.factor_column.empty()) {
    FactorSpec& factor = design->factor;
    factor.column = request.factor_column;
    factor.coding = request.coding;
    const int column = table.ColumnIndex(request.factor_column);
    if (column < 0) {
      const std::string close = ClosestMatch(request.factor_column, table.header);
      diagnostics->AddError(request.factor_where,
                            "factor '" + request.factor_column + "' is not a column of " +
                                table.path + (close.empty() ? "" : "; did you mean '" + close +
                                                                       "'?"));
      return false;
    }
    std::set<std::string> present;
    for (int i = 0; i < n; ++i) present.insert(table.rows[rows[i]][column]);
    factor.levels = request.factor_levels;
    if (factor.levels.empty()) factor.levels.assign(present.begin(), present.end());
    for (int i = 0; i < n; ++i) {
      const std::string& value = table.rows[rows[i]][column];
      if (std::find(factor.levels.begin(), factor.levels.end(), value) == factor.levels.end()) {
        diagnostics->AddError(table.CellLocation(rows[i], column),
                              "factor '" + factor.column + "' of subject '" + subjects[i] +
                                  "': value '" + value + "' is not one of the levels " +
                                  Quoted(factor.levels));
      }
    }
    for (const std::string& level : factor.levels) {
      if (!present.count(level)) {
        diagnostics->AddError(request.factor_where,
                              "factor '" + factor.column + "': level '" + level +
                                  "' has no subjects in the input");
      } else if (!IsPlainName(factor.column + "_" + level)) {
        diagnostics->AddError(request.factor_where,
                              "factor '" + factor.column + "': level '" + level +
                                  "' gives the design column name '" + factor.column + "_" +
                                  level + "'; names use letters, digits, _ and - only");
      }
    }
    if (factor.levels.size() < 2) {
      diagnostics->AddError(request.factor_where,
                            "factor '" + factor.column + "' needs at least two levels; found " +
                                Quoted(factor.levels));
    }
    const size_t first = factor.coding == FactorCoding::kDifferences ? 1 : 0;
    for (size_t l = first; l < factor.levels.size(); ++l) {
      Eigen::VectorXd indicator(n);
      for (int i = 0; i < n; ++i) indicator[i] = table.rows[rows[i]][column] == factor.levels[l];
      design->columns.push_back(factor.column + "_" + factor.levels[l]);
      columns.push_back(indicator);
    }
  }
  std::set<std::string> unique_columns;
  for (const std::string& name : design->columns) {
    if (!unique_columns.insert(name).second) {
      diagnostics->AddError(request.where, "design column '" + name + "' appears twice");
    }
  }
  if (diagnostics->ErrorCount() > errors_before) return false;

  const int k = static_cast<int>(columns.size());
  design->z.resize(n, k);
  for (int j = 0; j < k; ++j) design->z.col(j) = columns[j];
  if (n <= k) {
    diagnostics->AddError(request.where, "the input has " + std::to_string(n) +
                                             " subjects but the design has " +
                                             std::to_string(k) +
                                             " columns; pooling needs more subjects than "
                                             "columns");
    return false;
  }
  Eigen::ColPivHouseholderQR<Eigen::MatrixXd> qr(design->z);
  qr.setThreshold(1e-10);
  if (qr.rank() < k) {
    diagnostics->AddError(request.where,
                          "the design columns " + Quoted(design->columns) +
                              " are linearly dependent over the input's subjects (rank " +
                              std::to_string(qr.rank()) + " of " + std::to_string(k) + ")");
    return false;
  }
  return true;
}

bool ResolveGroupContrasts(const std::vector<ContrastRequest>& requests,
                           const GroupDesign& design, std::vector<GroupContrast>* contrasts,
                           Diagnostics* diagnostics) {
  const int errors_before = diagnostics->ErrorCount();
  const int k = static_cast<int>(design.columns.size());
  for (const ContrastRequest& request : requests) {
    GroupContrast contrast{request.name, Eigen::MatrixXd::Zero(request.rows.size(), k),
                           request.is_f, request.where};
    for (size_t r = 0; r < request.rows.size(); ++r) {
      for (const auto& [key, weight] : request.rows[r]) {
        const auto column = std::find(design.columns.begin(), design.columns.end(), key);
        if (column == design.columns.end()) {
          const std::string close = ClosestMatch(key, design.columns);
          diagnostics->AddError(request.key_where[r].at(key),
                                "contrast '" + request.name + "': '" + key +
                                    "' is not a design column" +
                                    (close.empty() ? "" : "; did you mean '" + close + "'?") +
                                    " (columns: " + Quoted(design.columns) + ")");
          continue;
        }
        contrast.weights(static_cast<Eigen::Index>(r), column - design.columns.begin()) = weight;
      }
      if (contrast.weights.row(static_cast<Eigen::Index>(r)).isZero(0)) {
        diagnostics->AddError(request.where, "contrast '" + request.name + "': row " +
                                                 std::to_string(r + 1) + " has no non-zero weight");
      }
    }
    if (request.is_f && contrast.weights.rows() > 1) {
      Eigen::ColPivHouseholderQR<Eigen::MatrixXd> qr(contrast.weights.transpose());
      qr.setThreshold(1e-10);
      if (qr.rank() < contrast.weights.rows()) {
        diagnostics->AddError(request.where, "contrast '" + request.name + "': its " +
                                                 std::to_string(contrast.weights.rows()) +
                                                 " rows are linearly dependent");
      }
    }
    contrasts->push_back(contrast);
  }
  return diagnostics->ErrorCount() == errors_before;
}

std::vector<GroupContrast> DefaultGroupContrasts(const GroupDesign& design,
                                                 const SourceLocation& where) {
  std::vector<GroupContrast> contrasts;
  const Eigen::Index k = static_cast<Eigen::Index>(design.columns.size());
  for (Eigen::Index j = 0; j < k; ++j) {
    GroupContrast contrast{design.columns[j], Eigen::MatrixXd::Zero(1, k), false, where};
    contrast.weights(0, j) = 1.0;
    contrasts.push_back(contrast);
  }
  return contrasts;
}

}  // namespace boldsum
