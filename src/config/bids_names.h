// BIDS file names taken apart: `sub-01_ses-02_task-melodies_run-1_bold.nii.gz` is the
// entities (sub, 01) (ses, 02) (task, melodies) (run, 1), the suffix `bold` and the
// extension `.nii.gz` (everything from the first dot).
#pragma once

#include <optional>
#include <string>
#include <utility>
#include <vector>

namespace boldsum::config {

struct BidsName {
  std::vector<std::pair<std::string, std::string>> entities;  // in file-name order
  std::string suffix;
  std::string extension;

  // The entity's label, "" when the name has no such entity.
  std::string Get(const std::string& key) const;
  // The name without the entities in `drop`: "<key>-<label>" joined by '_'.
  std::string Stem(const std::vector<std::string>& drop) const;
};

// Entities that a derivative (preprocessed) bold file adds to the raw file's name.
const std::vector<std::string>& DerivativeEntities();

// nullopt unless every part before the suffix is "<key>-<label>" with a non-empty
// lowercase key and a non-empty letters-and-digits label, and the suffix is letters and
// digits. Repeated keys are rejected.
std::optional<BidsName> ParseBidsName(const std::string& file_name);

// True when every entity of `general` is in `specific` with the same label (the BIDS
// inheritance rule for which metadata files apply to a data file).
bool AppliesTo(const BidsName& general, const BidsName& specific);

// Letters and digits only, at least one.
bool IsBidsLabel(const std::string& text);

// Orders labels as people expect: two all-digit labels by value ("2" < "10"; then
// "01" < "1" for a stable order), anything else by bytes, numbers before words.
bool NaturalLess(const std::string& a, const std::string& b);

}  // namespace boldsum::config
