#include "config/participants_reader.h"

#include <map>

#include "boldsum/io.h"

namespace boldsum::config {

std::string ParticipantKey(const std::string& id) {
  return id.rfind("sub-", 0) == 0 ? id.substr(4) : id;
}

void CheckParticipants(YamlReader& reader, const ResolvedPath& path, const SourceLocation& anchor,
                       const std::vector<SubjectSpec>& subjects) {
  Reporter& reporter = reader.reporter();
  const std::optional<Table> read = reader.ReadTableAt(path, anchor);
  if (!read) return;
  const Table& table = *read;
  const int id_column = table.ColumnIndex("participant_id");
  if (id_column < 0) {
    const std::string near = ClosestMatch("participant_id", table.header);
    reporter.Add(Severity::kError, SourceLocation{table.path, 1, 0},
                 "participants table has no 'participant_id' column" +
                     (near.empty() ? std::string() : " (did you mean '" + near + "'?)"),
                 anchor);
    return;
  }
  for (int c = 0; c < static_cast<int>(table.header.size()); ++c) {
    const std::string& name = table.header[c];
    if (name == "subject" || name.rfind("dof_", 0) == 0) {
      reporter.Add(Severity::kError, SourceLocation{table.path, 1, 0},
                   "column '" + name +
                       "' clashes with a column boldsum writes to pool-ready/subjects.tsv "
                       "(subject, dof_<contrast>); rename it",
                   anchor);
    }
  }
  std::map<std::string, int> first_row;
  for (int r = 0; r < static_cast<int>(table.rows.size()); ++r) {
    const std::string& id = table.rows[r][id_column];
    if (id.empty()) {
      reporter.Add(Severity::kError, table.CellLocation(r, id_column), "empty participant_id",
                   anchor);
      continue;
    }
    const auto [first, added] = first_row.emplace(ParticipantKey(id), r);
    if (!added) {
      reporter.Add(Severity::kError, table.CellLocation(r, id_column),
                   "participant '" + id + "' appears twice (also on line " +
                       std::to_string(first->second + 2) + "; ids are compared without 'sub-')",
                   anchor);
    }
  }
  for (const SubjectSpec& subject : subjects) {
    if (subject.id.empty() || first_row.count(ParticipantKey(subject.id)) != 0) continue;
    reporter.Add(Severity::kWarning, SourceLocation{table.path, 0, 0},
                 "subject '" + subject.id +
                     "' has no row (its participants columns will be n/a in "
                     "pool-ready/subjects.tsv)",
                 anchor);
  }
}

}  // namespace boldsum::config
