// LoadConfounds (declared in boldsum/design.h).
//
// n/a rule: an `n/a` cell of a confound column is replaced by the mean of that column's
// numeric cells (a column with no numeric cell is an error); an `n/a` cell of the censoring
// column reads as 0, i.e. "not censored".
#include <cmath>
#include <string>

#include "boldsum/design.h"
#include "boldsum/io.h"

namespace boldsum {
namespace {

std::string JoinNames(const std::vector<std::string>& names) {
  std::string text;
  for (const std::string& name : names) text += (text.empty() ? "" : ", ") + name;
  return text;
}

// 1-based character column of header cell `index` (cells are tab-separated, verbatim).
int HeaderColumn(const std::vector<std::string>& header, int index) {
  int offset = 1;
  for (int c = 0; c < index; ++c) offset += static_cast<int>(header[c].size()) + 1;
  return offset;
}

int FindColumn(const NumericTable& table, const std::string& name, const std::string& role) {
  for (size_t c = 0; c < table.names.size(); ++c) {
    if (table.names[c] == name) return static_cast<int>(c);
  }
  std::string message = "no column '" + name + "' (" + role + ")";
  const std::string guess = ClosestMatch(name, table.names);
  message += guess.empty() ? "." : "; did you mean '" + guess + "'?";
  message += " The table's columns: " + JoinNames(table.names);
  throw Error(SourceLocation{table.path, 1, 0}, message);
}

}  // namespace

ConfoundTable LoadConfounds(const ModelSpec& model, const RunSpec& run) {
  ConfoundTable confounds;
  confounds.path = run.confounds_path;
  confounds.names = model.confounds;
  if (model.confounds.empty() && !model.censor) return confounds;
  if (run.confounds_path.empty()) {
    std::string needs =
        model.confounds.empty() ? "" : "confounds (" + JoinNames(model.confounds) + ")";
    if (model.censor) {
      needs += (needs.empty() ? "" : " and ") + std::string("censoring by column '") +
               model.censor->column + "'";
    }
    throw Error(run.where, "the model uses " + needs + " but this run has no confounds file");
  }

  const NumericTable table = ReadNumericTable(run.confounds_path, /*allow_na=*/true);
  const int rows = static_cast<int>(table.values.rows());
  confounds.values.resize(rows, static_cast<int>(model.confounds.size()));
  for (size_t m = 0; m < model.confounds.size(); ++m) {
    const int c = FindColumn(table, model.confounds[m], "a confound of the model");
    double sum = 0.0;
    int numeric = 0;
    for (int r = 0; r < rows; ++r) {
      if (!std::isnan(table.values(r, c))) {
        sum += table.values(r, c);
        ++numeric;
      }
    }
    if (rows > 0 && numeric == 0) {
      throw Error(SourceLocation{table.path, 1, HeaderColumn(table.names, c)},
                  "confound column '" + model.confounds[m] + "' has no numeric cell (all " +
                      std::to_string(rows) +
                      " are n/a); n/a cells are replaced by the column mean, which needs at "
                      "least one number");
    }
    const double mean = numeric > 0 ? sum / numeric : 0.0;
    for (int r = 0; r < rows; ++r) {
      const double value = table.values(r, c);
      confounds.values(r, static_cast<int>(m)) = std::isnan(value) ? mean : value;
    }
  }
  if (model.censor) {
    const int c = FindColumn(table, model.censor->column, "the model's censoring column");
    confounds.censor_signal.resize(rows);
    for (int r = 0; r < rows; ++r) {
      const double value = table.values(r, c);
      confounds.censor_signal(r) = std::isnan(value) ? 0.0 : value;
    }
  }
  return confounds;
}

}  // namespace boldsum
