#include "config/keys.h"

#include <algorithm>

namespace boldsum::config {

std::vector<std::string> KeyLevel::Names() const {
  std::vector<std::string> names;
  for (const KeyRule& rule : keys) names.push_back(rule.name);
  return names;
}

bool KeyLevel::Has(const std::string& name) const {
  return std::any_of(keys.begin(), keys.end(),
                     [&](const KeyRule& rule) { return rule.name == name; });
}

const KeyLevel& TopKeys() {
  static const KeyLevel level{"",
                              {{"version"},
                               {"tr", true},
                               {"slice_reference"},
                               {"hrf"},
                               {"drift"},
                               {"autocorrelation"},
                               {"conditions", true},
                               {"ignore"},
                               {"confounds"},
                               {"censor"},
                               {"contrasts"},
                               {"mask"},
                               {"subjects"},
                               {"subjects_from"},
                               {"output"},
                               {"participants"}}};
  return level;
}

const KeyLevel& HrfKeys() {
  static const KeyLevel level{"hrf", {{"shape"}, {"derivatives"}, {"fir_bin_s"}, {"fir_bins"}}};
  return level;
}

const KeyLevel& DriftKeys() {
  static const KeyLevel level{"drift", {{"kind"}, {"cutoff_s"}, {"degree"}}};
  return level;
}

const KeyLevel& CensorKeys() {
  static const KeyLevel level{"censor", {{"column", true}, {"above", true}}};
  return level;
}

const KeyLevel& SubjectKeys() {
  static const KeyLevel level{"subjects[]", {{"id", true}, {"runs", true}}};
  return level;
}

const KeyLevel& SubjectsFromKeys() {
  static const KeyLevel level{"subjects_from",
                              {{"bids", true},
                               {"task", true},
                               {"session"},
                               {"space"},
                               {"desc"},
                               {"confounds"},
                               {"derivatives"}}};
  return level;
}

const KeyLevel& RunKeys() {
  static const KeyLevel level{"subjects[].runs[]",
                              {{"data", true}, {"events", true}, {"confounds"}}};
  return level;
}

const KeyLevel& InlineEventKeys() {
  static const KeyLevel level{"subjects[].runs[].events.<trial type>[]",
                              {{"onset", true}, {"duration", true}, {"amplitude"}}};
  return level;
}

const KeyLevel& InlineOnsetsKeys() {
  static const KeyLevel level{"subjects[].runs[].events.<trial type>",
                              {{"onsets", true}, {"duration", true}, {"amplitude"}}};
  return level;
}

std::vector<const KeyLevel*> AllKeyLevels() {
  return {&TopKeys(),         &HrfKeys(), &DriftKeys(),       &CensorKeys(),
          &SubjectKeys(),     &RunKeys(), &InlineEventKeys(), &InlineOnsetsKeys(),
          &SubjectsFromKeys()};
}

}  // namespace boldsum::config
