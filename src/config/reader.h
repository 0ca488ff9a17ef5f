// Located access to a parsed YAML config: every read either yields a value or records
// a diagnostic at the value's file:line:column naming the key path, the offending value
// and the rule. Nothing here throws for bad input.
#pragma once

#include <yaml-cpp/yaml.h>

#include <cstddef>
#include <map>
#include <optional>
#include <string>
#include <vector>

#include "boldsum/error.h"
#include "boldsum/io.h"
#include "config/keys.h"

namespace boldsum::config {

// Diagnostics gathered while loading. Each carries an anchor: the config position it
// belongs to (itself for config positions; the naming key for problems inside an
// events or confounds table), so that the final list follows the config's order.
class Reporter {
 public:
  void Add(Severity severity, SourceLocation where, std::string message,
           const SourceLocation& anchor);
  bool HasErrors() const;
  int ErrorCount() const;
  // Stable-sorted by anchor (line, then column); whole-file problems come first.
  Diagnostics Sorted() const;

 private:
  struct Entry {
    int line;
    int column;
    Diagnostic diagnostic;
  };
  std::vector<Entry> entries_;
};

// A value in the document and the key path that leads to it ("hrf.shape",
// "subjects[0].runs[1].data"). `key` is undefined for list items.
struct Field {
  std::string path;
  YAML::Node key;
  YAML::Node value;
};

// Resolved file name: `absolute` for the spec, `shown` (the config's folder as the user
// gave it, joined with the relative path) for messages and for opening.
struct ResolvedPath {
  std::string absolute;
  std::string shown;
};

class YamlReader {
 public:
  // `shown_file` names the config in messages; `absolute_dir` is its folder.
  YamlReader(std::string shown_file, std::string absolute_dir, Reporter* reporter);

  const std::string& file() const { return file_; }
  Reporter& reporter() { return *reporter_; }

  // 1-based position of a node (line 0 when the node has none).
  SourceLocation At(const YAML::Node& node) const;
  // The value's position; the key's when the value is empty (yaml-cpp places an empty
  // value at the start of the next line).
  SourceLocation At(const Field& field) const;

  void Error(const SourceLocation& where, const std::string& message);
  void Warning(const SourceLocation& where, const std::string& message);
  // "<field.path>: <message>" at the field's value.
  void Error(const Field& field, const std::string& message);

  // The pairs of a mapping in document order; reports duplicate keys (keeping the
  // first) and a value that is not a mapping (`what` describes the expected content).
  std::optional<std::vector<Field>> Entries(const Field& field, const std::string& what);
  // Entries checked against a key table: unknown keys (with the nearest valid key
  // suggested), missing required keys. Returns the known fields by key name.
  std::optional<std::map<std::string, Field>> Fields(const Field& field, const KeyLevel& level);
  // The items of a list as fields "<path>[i]"; reports a value that is not a list.
  std::optional<std::vector<Field>> Items(const Field& field, const std::string& what);

  // Scalars. `what` completes "expected ..." (e.g. "a number in seconds").
  std::optional<double> Number(const Field& field, const std::string& what);
  std::optional<long long> Integer(const Field& field, const std::string& what);
  std::optional<std::string> Text(const Field& field, const std::string& what);
  template <typename Enum>
  std::optional<Enum> OneOf(const Field& field, const std::vector<Choice<Enum>>& choices);

  // Resolves a path against the config's folder.
  ResolvedPath Resolve(const std::string& path) const;
  // A path-valued field naming a file that must exist; nullopt (after reporting) if it
  // is not text, does not exist, or is a folder.
  std::optional<ResolvedPath> ExistingFile(const Field& field, const std::string& what);
  // The TSV table at `path` (named by the config at `anchor`); nullopt after reporting
  // why it could not be read, at the table's own file and line.
  std::optional<Table> ReadTableAt(const ResolvedPath& path, const SourceLocation& anchor);

  // "'two'" for a scalar, "a mapping", "a list" or "nothing".
  static std::string Describe(const YAML::Node& node);
  void ReportWrongType(const Field& field, const std::string& what);

 private:
  std::string file_;
  std::string absolute_dir_;
  std::string shown_dir_;
  Reporter* reporter_;
};

// "path: message", or just the message at the top level.
std::string Prefixed(const std::string& path, const std::string& message);
// Names joined with ", ".
std::string JoinNames(const std::vector<std::string>& names);

template <typename Enum>
std::optional<Enum> YamlReader::OneOf(const Field& field,
                                      const std::vector<Choice<Enum>>& choices) {
  std::vector<std::string> words;
  for (const Choice<Enum>& choice : choices) words.push_back(choice.word);
  const std::optional<std::string> text = Text(field, "one of: " + JoinNames(words));
  if (!text) return std::nullopt;
  for (const Choice<Enum>& choice : choices) {
    if (choice.word == *text) return choice.value;
  }
  const std::string near = ClosestMatch(*text, words);
  Error(field, "unknown value '" + *text + "'" +
                   (near.empty() ? "" : " (did you mean '" + near + "'?)") +
                   "; expected one of: " + JoinNames(words));
  return std::nullopt;
}

}  // namespace boldsum::config
