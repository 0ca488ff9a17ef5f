#include "config/reader.h"

#include <algorithm>
#include <charconv>
#include <filesystem>
#include <system_error>
#include <utility>

#include "boldsum/io.h"

namespace boldsum::config {

namespace fs = std::filesystem;

void Reporter::Add(Severity severity, SourceLocation where, std::string message,
                   const SourceLocation& anchor) {
  entries_.push_back(
      {anchor.line, anchor.column, Diagnostic{severity, std::move(where), std::move(message)}});
}

bool Reporter::HasErrors() const { return ErrorCount() > 0; }

int Reporter::ErrorCount() const {
  return static_cast<int>(std::count_if(entries_.begin(), entries_.end(), [](const Entry& e) {
    return e.diagnostic.severity == Severity::kError;
  }));
}

Diagnostics Reporter::Sorted() const {
  std::vector<Entry> sorted = entries_;
  std::stable_sort(sorted.begin(), sorted.end(), [](const Entry& a, const Entry& b) {
    return std::make_pair(a.line, a.column) < std::make_pair(b.line, b.column);
  });
  Diagnostics diagnostics;
  for (const Entry& entry : sorted) {
    const Diagnostic& d = entry.diagnostic;
    if (d.severity == Severity::kError) {
      diagnostics.AddError(d.where, d.message);
    } else {
      diagnostics.AddWarning(d.where, d.message);
    }
  }
  return diagnostics;
}

std::string Prefixed(const std::string& path, const std::string& message) {
  return path.empty() ? message : path + ": " + message;
}

std::string JoinNames(const std::vector<std::string>& names) {
  std::string joined;
  for (const std::string& name : names) joined += (joined.empty() ? "" : ", ") + name;
  return joined;
}

YamlReader::YamlReader(std::string shown_file, std::string absolute_dir, Reporter* reporter)
    : file_(std::move(shown_file)),
      absolute_dir_(std::move(absolute_dir)),
      shown_dir_(fs::path(file_).parent_path().string()),
      reporter_(reporter) {}

SourceLocation YamlReader::At(const YAML::Node& node) const {
  const YAML::Mark mark = node.Mark();
  if (mark.line < 0) return SourceLocation{file_, 0, 0};
  return SourceLocation{file_, mark.line + 1, mark.column + 1};
}

SourceLocation YamlReader::At(const Field& field) const {
  if (field.value.IsNull() && field.key.IsDefined()) return At(field.key);
  if (field.value.Mark().line < 0 && field.key.IsDefined()) return At(field.key);
  return At(field.value);
}

void YamlReader::Error(const SourceLocation& where, const std::string& message) {
  reporter_->Add(Severity::kError, where, message, where);
}

void YamlReader::Warning(const SourceLocation& where, const std::string& message) {
  reporter_->Add(Severity::kWarning, where, message, where);
}

void YamlReader::Error(const Field& field, const std::string& message) {
  Error(At(field), Prefixed(field.path, message));
}

std::string YamlReader::Describe(const YAML::Node& node) {
  switch (node.Type()) {
    case YAML::NodeType::Scalar:
      return "'" + node.Scalar() + "'";
    case YAML::NodeType::Map:
      return "a mapping";
    case YAML::NodeType::Sequence:
      return "a list";
    default:
      return "nothing";
  }
}

void YamlReader::ReportWrongType(const Field& field, const std::string& what) {
  Error(field, "expected " + what + ", got " + Describe(field.value));
}

std::optional<std::vector<Field>> YamlReader::Entries(const Field& field, const std::string& what) {
  if (!field.value.IsMap()) {
    ReportWrongType(field, what);
    return std::nullopt;
  }
  std::vector<Field> entries;
  std::map<std::string, YAML::Node> first_keys;
  const std::string prefix = field.path.empty() ? "" : field.path + ".";
  for (auto it = field.value.begin(); it != field.value.end(); ++it) {
    const YAML::Node key = it->first;
    if (!key.IsScalar()) {
      Error(At(key), Prefixed(field.path, "keys must be plain words, got " + Describe(key)));
      continue;
    }
    const auto [first, inserted] = first_keys.emplace(key.Scalar(), key);
    if (!inserted) {
      Error(At(key),
            Prefixed(field.path, "duplicate key '" + key.Scalar() + "' (first given at line " +
                                     std::to_string(At(first->second).line) + ")"));
      continue;
    }
    entries.push_back(Field{prefix + key.Scalar(), key, it->second});
  }
  return entries;
}

std::optional<std::map<std::string, Field>> YamlReader::Fields(const Field& field,
                                                               const KeyLevel& level) {
  const std::vector<std::string> names = level.Names();
  const std::optional<std::vector<Field>> entries =
      Entries(field, "a mapping with keys " + JoinNames(names));
  if (!entries) return std::nullopt;
  std::map<std::string, Field> known;
  for (const Field& entry : *entries) {
    const std::string name = entry.key.Scalar();
    if (level.Has(name)) {
      known.emplace(name, entry);
      continue;
    }
    const std::string near = ClosestMatch(name, names);
    Error(At(entry.key),
          Prefixed(field.path, "unknown key '" + name + "'" +
                                   (near.empty() ? "; valid keys: " + JoinNames(names)
                                                 : " (did you mean '" + near + "'?)")));
  }
  for (const KeyRule& rule : level.keys) {
    if (rule.required && known.count(rule.name) == 0) {
      Error(At(field.value), Prefixed(field.path, "missing required key '" + rule.name + "'"));
    }
  }
  return known;
}

std::optional<std::vector<Field>> YamlReader::Items(const Field& field, const std::string& what) {
  if (!field.value.IsSequence()) {
    ReportWrongType(field, what);
    return std::nullopt;
  }
  std::vector<Field> items;
  for (std::size_t i = 0; i < field.value.size(); ++i) {
    items.push_back(
        Field{field.path + "[" + std::to_string(i) + "]", YAML::Node(), field.value[i]});
  }
  return items;
}

std::optional<double> YamlReader::Number(const Field& field, const std::string& what) {
  double value = 0.0;
  if (!field.value.IsScalar() || !ParseNumber(field.value.Scalar(), &value)) {
    ReportWrongType(field, what);
    return std::nullopt;
  }
  return value;
}

std::optional<long long> YamlReader::Integer(const Field& field, const std::string& what) {
  if (field.value.IsScalar()) {
    const std::string& text = field.value.Scalar();
    long long value = 0;
    const char* first = text.data();
    const char* last = text.data() + text.size();
    if (first != last && *first == '+') ++first;
    const std::from_chars_result result = std::from_chars(first, last, value);
    if (first != last && result.ec == std::errc() && result.ptr == last) return value;
  }
  ReportWrongType(field, what);
  return std::nullopt;
}

std::optional<std::string> YamlReader::Text(const Field& field, const std::string& what) {
  if (!field.value.IsScalar() || field.value.Scalar().empty()) {
    ReportWrongType(field, what);
    return std::nullopt;
  }
  return field.value.Scalar();
}

ResolvedPath YamlReader::Resolve(const std::string& path) const {
  const fs::path given(path);
  if (given.is_absolute()) return {given.lexically_normal().string(), path};
  return {(fs::path(absolute_dir_) / given).lexically_normal().string(),
          (fs::path(shown_dir_) / given).lexically_normal().string()};
}

std::optional<Table> YamlReader::ReadTableAt(const ResolvedPath& path,
                                             const SourceLocation& anchor) {
  try {
    return ReadTable(path.shown);
  } catch (const boldsum::Error& error) {
    reporter_->Add(Severity::kError, error.where(), error.message(), anchor);
    return std::nullopt;
  }
}

std::optional<ResolvedPath> YamlReader::ExistingFile(const Field& field, const std::string& what) {
  const std::optional<std::string> text = Text(field, what);
  if (!text) return std::nullopt;
  const ResolvedPath resolved = Resolve(*text);
  std::error_code error;
  const fs::file_status status = fs::status(resolved.absolute, error);
  if (!fs::exists(status)) {
    Error(field, "file '" + *text + "' not found (looked for " + resolved.absolute + ")");
    return std::nullopt;
  }
  if (fs::is_directory(status)) {
    Error(field, "'" + *text + "' is a folder; expected a file");
    return std::nullopt;
  }
  return resolved;
}

}  // namespace boldsum::config
