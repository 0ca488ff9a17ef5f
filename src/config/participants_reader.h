// The optional participants table named by the top-level key `participants`: a TSV in
// the BIDS participants.tsv layout whose other columns are copied beside each subject
// into OUT/pool-ready/subjects.tsv (see README "Pool-ready stacks").
#pragma once

#include <string>
#include <vector>

#include "boldsum/config.h"
#include "config/reader.h"

namespace boldsum::config {

// The id used to match a participants row with a config subject: `id` without a
// leading "sub-" (so "sub-07" matches "07" and the other way round).
std::string ParticipantKey(const std::string& id);

// Checks the table at `path`: readable, a `participant_id` column, no id given twice
// (compared by ParticipantKey), no column that pool-ready/subjects.tsv writes itself
// (`subject`, `dof_<name>`). Errors are reported at the table's cell or header, anchored
// at `anchor` (the config key); a warning names each subject without a row (its columns
// become n/a).
void CheckParticipants(YamlReader& reader, const ResolvedPath& path, const SourceLocation& anchor,
                       const std::vector<SubjectSpec>& subjects);

}  // namespace boldsum::config
