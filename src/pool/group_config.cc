// LoadGroupConfig: the group model config (YAML) to a validated GroupSpec. Every key is
// documented in configs/group_reference.yaml. Paths are relative to the config's folder.
#include <yaml-cpp/yaml.h>

#include <algorithm>
#include <cctype>
#include <filesystem>
#include <set>

#include "boldsum/io.h"
#include "boldsum/pool.h"
#include "pool/group_config.h"
#include "pool/group_design.h"
#include "pool/pool_inputs.h"

namespace boldsum {
namespace {

namespace fs = std::filesystem;

const std::vector<std::string> kTopKeys = {"input",  "first_level_contrasts", "participants",
                                           "design", "contrasts",             "method",
                                           "output"};
const std::vector<std::string> kDesignKeys = {"intercept", "covariates", "centre_covariates",
                                              "factor"};
const std::vector<std::string> kCovariateKeys = {"column", "centre"};
const std::vector<std::string> kFactorKeys = {"column", "levels", "coding"};

// Reads one config file, remembering where each node was written.
class Reader {
 public:
  Reader(std::string path, Diagnostics* diagnostics)
      : path_(std::move(path)), diagnostics_(diagnostics) {}

  SourceLocation At(const YAML::Node& node) const {
    const YAML::Mark mark = node.Mark();
    if (mark.line < 0) return {path_, 0, 0};
    return {path_, mark.line + 1, mark.column + 1};
  }
  void Fail(const YAML::Node& node, const std::string& message) const {
    diagnostics_->AddError(At(node), message);
  }

  // Checks that `node` is a mapping with known keys, each once.
  bool CheckMap(const YAML::Node& node, const std::string& what,
                const std::vector<std::string>& known) const {
    if (!node.IsMap()) {
      Fail(node, what + ": expected a mapping of keys to values");
      return false;
    }
    std::set<std::string> seen;
    for (const auto& entry : node) {
      const std::string key = entry.first.Scalar();
      if (!seen.insert(key).second) {
        Fail(entry.first, what + ": key '" + key + "' is given twice");
      } else if (std::find(known.begin(), known.end(), key) == known.end()) {
        const std::string close = ClosestMatch(key, known);
        Fail(entry.first, what + ": unknown key '" + key + "'" +
                              (close.empty() ? "" : "; did you mean '" + close + "'?"));
      }
    }
    return true;
  }

  bool String(const YAML::Node& node, const std::string& what, std::string* value) const {
    if (!node.IsScalar() || node.Scalar().empty()) {
      Fail(node, what + ": expected a non-empty text value");
      return false;
    }
    *value = node.Scalar();
    return true;
  }

  bool Bool(const YAML::Node& node, const std::string& what, bool* value) const {
    if (node.IsScalar()) {
      const std::string& text = node.Scalar();
      if (text == "true") return *value = true, true;
      if (text == "false") return *value = false, true;
    }
    Fail(node, what + ": expected true or false, got '" + Text(node) + "'");
    return false;
  }

  bool Strings(const YAML::Node& node, const std::string& what,
               std::vector<std::string>* values) const {
    if (node.IsScalar()) return String(node, what, &values->emplace_back());
    if (!node.IsSequence()) {
      Fail(node, what + ": expected a list of names");
      return false;
    }
    bool ok = true;
    for (const YAML::Node& item : node) ok = String(item, what, &values->emplace_back()) && ok;
    return ok;
  }

  std::string Path(const YAML::Node& node, const std::string& what) const {
    std::string text;
    if (!String(node, what, &text)) return "";
    const fs::path path(text);
    return (path.is_absolute() ? path : fs::path(path_).parent_path() / path)
        .lexically_normal()
        .string();
  }

  static std::string Text(const YAML::Node& node) {
    if (node.IsScalar()) return node.Scalar();
    if (node.IsSequence()) return "a list";
    if (node.IsMap()) return "a mapping";
    return "nothing";
  }

  const std::string& path() const { return path_; }

 private:
  std::string path_;
  Diagnostics* diagnostics_;
};

void ReadDesign(const Reader& reader, const YAML::Node& node, DesignRequest* request) {
  request->where = reader.At(node);
  if (!node || !reader.CheckMap(node, "design", kDesignKeys)) return;
  if (node["intercept"]) reader.Bool(node["intercept"], "design.intercept", &request->intercept);
  bool centre = true;
  if (node["centre_covariates"]) {
    reader.Bool(node["centre_covariates"], "design.centre_covariates", &centre);
  }
  if (const YAML::Node covariates = node["covariates"]) {
    if (!covariates.IsSequence()) {
      reader.Fail(covariates, "design.covariates: expected a list of participants columns");
    } else {
      for (const YAML::Node& item : covariates) {
        DesignRequest::Covariate covariate{"", centre, reader.At(item)};
        if (item.IsMap()) {
          if (!reader.CheckMap(item, "design.covariates", kCovariateKeys)) continue;
          if (!item["column"]) {
            reader.Fail(item, "design.covariates: an entry written as a mapping needs 'column'");
            continue;
          }
          reader.String(item["column"], "design.covariates.column", &covariate.column);
          if (item["centre"]) {
            reader.Bool(item["centre"], "design.covariates.centre", &covariate.centre);
          }
        } else if (!reader.String(item, "design.covariates", &covariate.column)) {
          continue;
        }
        request->covariates.push_back(covariate);
      }
    }
  }
  if (const YAML::Node factor = node["factor"]) {
    request->factor_where = reader.At(factor);
    if (factor.IsScalar()) {
      reader.String(factor, "design.factor", &request->factor_column);
    } else if (reader.CheckMap(factor, "design.factor", kFactorKeys)) {
      if (!factor["column"]) {
        reader.Fail(factor, "design.factor: needs 'column' (the participants column)");
      } else {
        reader.String(factor["column"], "design.factor.column", &request->factor_column);
      }
      if (factor["levels"]) {
        reader.Strings(factor["levels"], "design.factor.levels", &request->factor_levels);
        std::set<std::string> unique(request->factor_levels.begin(),
                                     request->factor_levels.end());
        if (unique.size() != request->factor_levels.size()) {
          reader.Fail(factor["levels"], "design.factor.levels: a level is listed twice");
        }
      }
      if (const YAML::Node coding = factor["coding"]) {
        if (coding.IsScalar() && coding.Scalar() == "differences") {
          request->coding = FactorCoding::kDifferences;
        } else if (coding.IsScalar() && coding.Scalar() == "cell_means") {
          request->coding = FactorCoding::kCellMeans;
        } else {
          reader.Fail(coding, "design.factor.coding: expected 'differences' or 'cell_means', "
                              "got '" + Reader::Text(coding) + "'");
        }
      }
    }
  }
}

bool ReadWeights(const Reader& reader, const YAML::Node& node, const std::string& name,
                 ContrastRequest* request) {
  if (!node.IsMap() || node.size() == 0) {
    reader.Fail(node, "contrast '" + name + "': expected a mapping of design column to weight");
    return false;
  }
  auto& row = request->rows.emplace_back();
  auto& where = request->key_where.emplace_back();
  bool ok = true;
  for (const auto& entry : node) {
    const std::string key = entry.first.Scalar();
    double weight = 0;
    if (!entry.second.IsScalar() || !ParseNumber(entry.second.Scalar(), &weight)) {
      reader.Fail(entry.second, "contrast '" + name + "', column '" + key +
                                    "': the weight must be a finite number, got '" +
                                    Reader::Text(entry.second) + "'");
      ok = false;
    } else if (!row.emplace(key, weight).second) {
      reader.Fail(entry.first, "contrast '" + name + "': column '" + key + "' is given twice");
      ok = false;
    }
    where.emplace(key, reader.At(entry.first));
  }
  return ok;
}

void ReadContrasts(const Reader& reader, const YAML::Node& node,
                   std::vector<ContrastRequest>* requests) {
  if (!node.IsMap()) {
    reader.Fail(node, "contrasts: expected a mapping of contrast name to weights");
    return;
  }
  std::set<std::string> names;
  for (const auto& entry : node) {
    ContrastRequest request;
    request.name = entry.first.Scalar();
    request.where = reader.At(entry.first);
    const bool plain = !request.name.empty() &&
                       std::all_of(request.name.begin(), request.name.end(), [](char c) {
                         return std::isalnum(static_cast<unsigned char>(c)) || c == '_' ||
                                c == '-';
                       });
    if (!plain) {
      reader.Fail(entry.first, "contrast name '" + request.name +
                                   "': use letters, digits, _ and - only (it names files)");
    } else if (!names.insert(request.name).second) {
      reader.Fail(entry.first, "contrast '" + request.name + "' is defined twice");
    }
    bool ok = true;
    if (entry.second.IsSequence()) {
      request.is_f = true;
      if (entry.second.size() == 0) {
        reader.Fail(entry.second, "contrast '" + request.name + "': the list of rows is empty");
        ok = false;
      }
      for (const YAML::Node& row : entry.second) {
        ok = ReadWeights(reader, row, request.name, &request) && ok;
      }
    } else {
      ok = ReadWeights(reader, entry.second, request.name, &request);
    }
    if (ok && plain) requests->push_back(request);
  }
}

void ReadSpec(const Reader& reader, const YAML::Node& root, GroupSpec* spec,
              Diagnostics* diagnostics) {
  if (!reader.CheckMap(root, "group config", kTopKeys)) return;
  const SourceLocation file_location{reader.path(), 0, 0};
  // Input: every later check needs its subjects.
  const YAML::Node input = root["input"];
  bool input_ok = false;
  if (!input) {
    diagnostics->AddError(file_location, "missing key 'input' (a pool-ready folder or a ROI "
                                         "summaries table)");
  } else {
    const std::string path = reader.Path(input, "input");
    if (!path.empty()) {
      input_ok = DescribePoolInput(path, reader.At(input), &spec->input, diagnostics);
    }
  }
  if (const YAML::Node wanted = root["first_level_contrasts"]) {
    std::vector<std::string> names;
    if (reader.Strings(wanted, "first_level_contrasts", &names) && input_ok) {
      std::set<std::string> seen;
      for (const std::string& name : names) {
        if (!seen.insert(name).second) {
          reader.Fail(wanted, "first_level_contrasts: '" + name + "' is listed twice");
        } else if (std::find(spec->input.contrasts.begin(), spec->input.contrasts.end(), name) ==
                   spec->input.contrasts.end()) {
          const std::string close = ClosestMatch(name, spec->input.contrasts);
          reader.Fail(wanted, "first_level_contrasts: '" + name + "' is not in the input" +
                                  (close.empty() ? "" : "; did you mean '" + close + "'?"));
        }
      }
      spec->first_level_contrasts = names;
    }
  } else {
    spec->first_level_contrasts = spec->input.contrasts;
  }
  DesignRequest design;
  design.where = file_location;
  if (const YAML::Node participants = root["participants"]) {
    design.participants_path = reader.Path(participants, "participants");
    design.participants_where = reader.At(participants);
    spec->participants_path = design.participants_path;
  }
  if (const YAML::Node node = root["design"]) ReadDesign(reader, node, &design);
  std::vector<ContrastRequest> contrasts;
  if (const YAML::Node node = root["contrasts"]) ReadContrasts(reader, node, &contrasts);
  if (const YAML::Node method = root["method"]) {
    const std::string text = Reader::Text(method);
    if (text == "mixed") {
      spec->method = PoolMethod::kMixed;
    } else if (text == "ols") {
      spec->method = PoolMethod::kOls;
    } else if (text == "fixed") {
      spec->method = PoolMethod::kFixed;
    } else {
      reader.Fail(method, "method: expected 'mixed', 'ols' or 'fixed', got '" + text + "'");
    }
  }
  spec->output_dir = root["output"] ? reader.Path(root["output"], "output")
                                    : (fs::path(reader.path()).parent_path() / "group").string();
  // The design and contrasts are still checked after other errors, so that one pass
  // reports as much as possible; they need a usable input.
  if (!input_ok) return;
  if (!BuildGroupDesign(design, spec->input.subjects, &spec->design, diagnostics)) return;
  if (root["contrasts"]) {
    ResolveGroupContrasts(contrasts, spec->design, &spec->contrasts, diagnostics);
  } else {
    spec->contrasts = DefaultGroupContrasts(spec->design, file_location);
  }
}

}  // namespace

std::vector<std::string> GroupConfigKeyPaths() {
  std::vector<std::string> paths = kTopKeys;
  for (const std::string& key : kDesignKeys) paths.push_back("design." + key);
  for (const std::string& key : kFactorKeys) paths.push_back("design.factor." + key);
  return paths;
}

LoadedGroupConfig LoadGroupConfig(const std::string& path) {
  LoadedGroupConfig loaded;
  std::error_code error;
  const std::string absolute = fs::absolute(path, error).lexically_normal().string();
  loaded.spec.config_path = absolute;
  YAML::Node root;
  try {
    root = YAML::LoadFile(absolute);
  } catch (const YAML::BadFile&) {
    loaded.diagnostics.AddError({absolute, 0, 0}, "cannot open the group config for reading");
    return loaded;
  } catch (const YAML::Exception& e) {
    loaded.diagnostics.AddError({absolute, e.mark.line + 1, e.mark.column + 1},
                                "not valid YAML: " + e.msg);
    return loaded;
  }
  try {
    ReadSpec(Reader(absolute, &loaded.diagnostics), root, &loaded.spec, &loaded.diagnostics);
  } catch (const YAML::Exception& e) {
    loaded.diagnostics.AddError({absolute, e.mark.line + 1, e.mark.column + 1}, e.msg);
  }
  return loaded;
}

}  // namespace boldsum
