// The contrasts section: t contrasts (a mapping of weights) and F contrasts (a list of
// mappings, one per row). Keys name a condition or a design column (naming.md).
#include <algorithm>
#include <optional>
#include <set>

#include "config/readers.h"

namespace boldsum::config {
namespace {

bool IsFileNameSafe(const std::string& name) {
  return !name.empty() && std::all_of(name.begin(), name.end(), [](char c) {
    return (c >= 'A' && c <= 'Z') || (c >= 'a' && c <= 'z') || (c >= '0' && c <= '9') || c == '_' ||
           c == '-';
  });
}

struct ContrastKeys {
  bool check = false;  // false when the model could not be read far enough
  std::set<std::string> valid;
  std::vector<std::string> ordered;  // for suggestions
  std::string conditions;            // "a, b, c" for messages
};

ContrastKeys ValidKeys(const ModelSpec& model, const ModelState& state) {
  ContrastKeys keys;
  keys.check = state.has_conditions && state.has_confounds;
  keys.ordered = model.conditions;
  for (const auto& column : TaskColumns(model)) keys.ordered.push_back(column.first);
  keys.ordered.insert(keys.ordered.end(), model.confounds.begin(), model.confounds.end());
  keys.ordered.push_back("intercept");
  keys.valid.insert(keys.ordered.begin(), keys.ordered.end());
  keys.conditions = JoinNames(model.conditions);
  return keys;
}

std::optional<std::map<std::string, double>> ReadRow(YamlReader& reader, const Field& field,
                                                     const ContrastKeys& keys) {
  const auto entries = reader.Entries(field, "a mapping of weights by condition");
  if (!entries) return std::nullopt;
  std::map<std::string, double> row;
  bool ok = true;
  for (const Field& entry : *entries) {
    const std::string name = entry.key.Scalar();
    if (keys.check && keys.valid.count(name) == 0) {
      const std::string near = ClosestMatch(name, keys.ordered);
      reader.Error(
          reader.At(entry.key),
          Prefixed(field.path, "weight for unknown condition '" + name + "'" +
                                   (near.empty() ? "" : " (did you mean '" + near + "'?)") +
                                   "; known: " + keys.conditions));
      ok = false;
      continue;
    }
    const std::optional<double> weight = reader.Number(entry, "a number (the weight)");
    if (!weight) {
      ok = false;
      continue;
    }
    row[name] = *weight;
  }
  if (entries->empty()) {
    reader.Error(field, "has no weights");
    return std::nullopt;
  }
  if (!ok) return std::nullopt;
  if (std::all_of(row.begin(), row.end(), [](const auto& w) { return w.second == 0.0; })) {
    reader.Error(field, "all weights are zero");
    return std::nullopt;
  }
  return row;
}

}  // namespace

std::vector<ContrastSpec> ReadContrasts(YamlReader& reader, const Field& field,
                                        const ModelSpec& model, const ModelState& state) {
  std::vector<ContrastSpec> contrasts;
  const auto entries = reader.Entries(field, "a mapping of contrast names to weights");
  if (!entries) return contrasts;
  const ContrastKeys keys = ValidKeys(model, state);
  for (const Field& entry : *entries) {
    ContrastSpec contrast;
    contrast.name = entry.key.Scalar();
    contrast.where = reader.At(entry.key);
    if (!IsFileNameSafe(contrast.name)) {
      reader.Error(contrast.where,
                   "contrasts: name '" + contrast.name +
                       "' may contain only letters, digits, '_' and '-' (it becomes part of "
                       "file names)");
    }
    if (entry.value.IsMap()) {
      if (auto row = ReadRow(reader, entry, keys)) contrast.rows.push_back(*row);
    } else if (entry.value.IsSequence()) {
      contrast.is_f = true;
      const auto items = reader.Items(entry, "a list of weight mappings");
      if (items && items->empty()) reader.Error(entry, "an F contrast needs at least one row");
      if (items) {
        for (const Field& item : *items) {
          if (auto row = ReadRow(reader, item, keys)) contrast.rows.push_back(*row);
        }
      }
    } else {
      reader.ReportWrongType(entry,
                             "a mapping of weights by condition (t contrast) or a list "
                             "of such mappings (F contrast)");
    }
    contrasts.push_back(contrast);
  }
  return contrasts;
}

}  // namespace boldsum::config
