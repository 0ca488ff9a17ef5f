#include "boldsum/error.h"

#include <algorithm>
#include <utility>

namespace boldsum {

std::string SourceLocation::ToString() const {
  std::string text = file;
  if (line > 0) {
    text += ":" + std::to_string(line);
    if (column > 0) text += ":" + std::to_string(column);
  }
  return text;
}

std::string Diagnostic::ToString() const {
  std::string prefix = where.ToString();
  if (!prefix.empty()) prefix += ": ";
  return prefix + (severity == Severity::kError ? "error: " : "warning: ") + message;
}

void Diagnostics::AddError(SourceLocation where, std::string message) {
  items_.push_back({Severity::kError, std::move(where), std::move(message)});
}

void Diagnostics::AddWarning(SourceLocation where, std::string message) {
  items_.push_back({Severity::kWarning, std::move(where), std::move(message)});
}

void Diagnostics::Append(const Diagnostics& other) {
  items_.insert(items_.end(), other.items_.begin(), other.items_.end());
}

bool Diagnostics::HasErrors() const { return ErrorCount() > 0; }

int Diagnostics::ErrorCount() const {
  return static_cast<int>(std::count_if(items_.begin(), items_.end(), [](const Diagnostic& d) {
    return d.severity == Severity::kError;
  }));
}

Error::Error(const std::string& message) : std::runtime_error(message), message_(message) {}

Error::Error(SourceLocation where, const std::string& message)
    : std::runtime_error(where.ToString().empty() ? message : where.ToString() + ": " + message),
      where_(std::move(where)),
      message_(message) {}

namespace {

size_t EditDistance(const std::string& a, const std::string& b) {
  std::vector<size_t> row(b.size() + 1);
  for (size_t j = 0; j <= b.size(); ++j) row[j] = j;
  for (size_t i = 1; i <= a.size(); ++i) {
    size_t diagonal = row[0];
    row[0] = i;
    for (size_t j = 1; j <= b.size(); ++j) {
      const size_t above = row[j];
      row[j] = std::min({row[j] + 1, row[j - 1] + 1, diagonal + (a[i - 1] == b[j - 1] ? 0 : 1)});
      diagonal = above;
    }
  }
  return row[b.size()];
}

}  // namespace

std::string ClosestMatch(const std::string& word, const std::vector<std::string>& candidates) {
  std::string best;
  size_t best_distance = std::max<size_t>(2, word.size() / 3) + 1;
  for (const std::string& candidate : candidates) {
    const size_t distance = EditDistance(word, candidate);
    if (distance < best_distance) {
      best_distance = distance;
      best = candidate;
    }
  }
  return best;
}

}  // namespace boldsum
