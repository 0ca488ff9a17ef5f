// What later stages read back from a fitted subject's OUT/<subject>/summary.json (written
// by subject_outputs.cc).
#pragma once

#include <string>
#include <vector>

#include "study/run_plan.h"

namespace boldsum {

// One contrast as a subject's summary.json records it.
struct RecordedContrast {
  std::string name;
  bool is_f = false;
  bool estimable = false;
  std::string dof_text;     // the dof exactly as summary.json writes it; "" when not estimable
  std::string outputs_key;  // see ContrastOutputsKey; "" when the file has none
};

// The parts of OUT/<subject>/summary.json that gather and the report need.
struct RecordedSubject {
  std::string id;
  DataKind kind = DataKind::kImage;
  std::vector<RecordedContrast> contrasts;  // in the file's order
  std::vector<std::string> regions;         // region tables only
  std::vector<std::string> warnings;        // the subject-level warnings (runs left out)

  const RecordedContrast* Find(const std::string& name) const;  // nullptr when absent
};

// Reads a summary.json written by `fit`. Throws Error("<path>: ...") when the file cannot
// be parsed or lacks a field named above.
RecordedSubject ReadRecordedSubject(const std::string& summary_json_path);

}  // namespace boldsum
