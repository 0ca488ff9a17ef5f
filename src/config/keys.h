// The config vocabulary as data: the keys allowed at each level of the YAML document
// and the words allowed for each enumerated setting. configs/reference.yaml documents
// every key listed here; a test checks that the two agree.
#pragma once

#include <string>
#include <vector>

namespace boldsum::config {

struct KeyRule {
  std::string name;
  bool required = false;
};

// One level of the document. `path` is how messages and the reference name the level:
// "" for the top, "hrf", "subjects[].runs[]", "subjects[].runs[].events.<trial type>[]".
struct KeyLevel {
  std::string path;
  std::vector<KeyRule> keys;

  std::vector<std::string> Names() const;
  bool Has(const std::string& name) const;
};

const KeyLevel& TopKeys();
const KeyLevel& HrfKeys();
const KeyLevel& DriftKeys();
const KeyLevel& CensorKeys();
const KeyLevel& SubjectKeys();
const KeyLevel& RunKeys();
const KeyLevel& InlineEventKeys();   // one event: {onset, duration, amplitude}
const KeyLevel& InlineOnsetsKeys();  // many events: {onsets, duration, amplitude}
const KeyLevel& SubjectsFromKeys();  // subjects found in a BIDS dataset

// Every level above, for the reference-file check.
std::vector<const KeyLevel*> AllKeyLevels();

// An enumerated setting: the YAML word and the enum value it stands for.
template <typename Enum>
struct Choice {
  std::string word;
  Enum value;
};

}  // namespace boldsum::config
