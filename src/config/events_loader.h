// Events of one run, from a BIDS events.tsv or written inline in the config.
//
// Both give every condition of the model (empty list when it has no events), each list
// stably sorted by onset; trial types listed under `ignore` are dropped unread. Onsets
// and durations must be finite and >= 0 seconds; amplitude defaults to 1. A trial type
// that is neither a condition nor ignored is an error (only when `check_types`, i.e.
// when the conditions themselves could be read).
#pragma once

#include <optional>

#include "boldsum/config.h"
#include "config/reader.h"

namespace boldsum::config {

// Table columns: onset, duration, trial_type (required), amplitude (optional); other
// columns are ignored. `n/a` in a used cell is an error. Problems are reported at the
// table's file:line:column and ordered under `anchor` (the config position naming it).
// All unknown trial types of one table make one error, at the first of them.
std::optional<EventsByCondition> LoadEventsTable(YamlReader& reader, const ResolvedPath& path,
                                                 const SourceLocation& anchor,
                                                 const ModelSpec& model, bool check_types);

// `field` is a mapping from trial type to either a list of {onset, duration, amplitude}
// or {onsets: [...], duration: x | [...], amplitude: a | [...]}; an empty value or an
// empty list means no events.
std::optional<EventsByCondition> ReadInlineEvents(YamlReader& reader, const Field& field,
                                                  const ModelSpec& model, bool check_types);

}  // namespace boldsum::config
