// The one error type of the boldsum core, and the diagnostics list used to report
// every problem of an input in one pass.
#pragma once

#include <stdexcept>
#include <string>
#include <vector>

namespace boldsum {

// Where something sits in an input file. Line and column are 1-based; 0 means unknown
// (a whole-file problem has line 0, a whole-line problem column 0).
struct SourceLocation {
  std::string file;
  int line = 0;
  int column = 0;

  // "file:line:column", "file:line" or "file", as much as is known.
  std::string ToString() const;
};

enum class Severity { kError, kWarning };

struct Diagnostic {
  Severity severity = Severity::kError;
  SourceLocation where;
  std::string message;

  // "file:line:column: error: message" (or "warning:").
  std::string ToString() const;
};

// Collects problems so that a whole input is checked before anything is reported.
class Diagnostics {
 public:
  void AddError(SourceLocation where, std::string message);
  void AddWarning(SourceLocation where, std::string message);
  void Append(const Diagnostics& other);

  bool HasErrors() const;
  int ErrorCount() const;
  const std::vector<Diagnostic>& all() const { return items_; }

 private:
  std::vector<Diagnostic> items_;
};

// Thrown for any failure inside the core: bad input that was not caught by config
// validation, unreadable files, numerical breakdown. The message is complete and
// user-facing; where() is filled in when the failure belongs to a place in a file.
class Error : public std::runtime_error {
 public:
  explicit Error(const std::string& message);
  Error(SourceLocation where, const std::string& message);
  const SourceLocation& where() const { return where_; }
  // The message without the "file:line:column: " that what() puts before it.
  const std::string& message() const { return message_; }

 private:
  SourceLocation where_;
  std::string message_;
};

// The candidate closest to `word` by edit distance, or "" when none is close enough
// to be a plausible typo (distance > max(2, |word| / 3)).
std::string ClosestMatch(const std::string& word, const std::vector<std::string>& candidates);

}  // namespace boldsum
