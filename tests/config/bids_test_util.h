// Small BIDS trees written into a StudyDir, and the discovery report with the folder
// written "D" (as StudyDir::Messages does for diagnostics).
#pragma once

#include <filesystem>
#include <string>
#include <vector>

#include "study_dir.h"

namespace boldsum::testing {

// tr and conditions; subjects_from follows from line 3.
inline const std::string kModel = "tr: 2\nconditions: [melody_known, melody_new, press]\n";

inline std::string Root(const StudyDir& dir) {
  return std::filesystem::path(dir.ConfigPath()).parent_path().string();
}

// `text` with every occurrence of the study folder written "D".
inline std::string Shown(const StudyDir& dir, std::string text) {
  const std::string root = Root(dir);
  for (size_t at = text.find(root); at != std::string::npos; at = text.find(root, at + 1)) {
    text.replace(at, root.size(), "D");
  }
  return text;
}

inline std::vector<std::string> Report(const StudyDir& dir, const LoadedConfig& loaded) {
  std::vector<std::string> lines;
  for (const std::string& line : loaded.spec.discovery_report) lines.push_back(Shown(dir, line));
  return lines;
}

// A bold image (placeholder bytes; discovery never reads them) and, unless
// `with_events` is false, its events table: `stem` is the path up to "_bold".
inline void WriteRun(const StudyDir& dir, const std::string& stem, bool with_events = true,
                     const std::string& events = kEventsTsv) {
  dir.Write(stem + "_bold.nii.gz", "placeholder\n");
  if (with_events) dir.Write(stem + "_events.tsv", events);
}

inline std::string Sidecar(double tr) {
  return "{\n  \"TaskName\": \"melodies\",\n  \"RepetitionTime\": " + std::to_string(tr) + "\n}\n";
}

}  // namespace boldsum::testing
