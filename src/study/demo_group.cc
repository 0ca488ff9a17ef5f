// The group stage of the demo study: its participants table and group configs.
#include <string>

#include "study/demo_study.h"

namespace boldsum {

std::string DemoParticipantsText() {
  // Invented ages; the demo plants no effect of age.
  return "participant_id\tage\n"
         "s01\t23\n"
         "s02\t31\n"
         "s03\t27\n"
         "s04\t35\n"
         "s05\t22\n"
         "s06\t29\n"
         "s07\t26\n"
         "s08\t33\n";
}

std::string DemoGroupConfigText(bool roi) {
  std::string text =
      "# The group stage of the synthetic melody study written "
      "by `boldsum demo`: pools the\n"
      "# volunteers' first-level summaries with a mixed-effects "
      "model (REML between-subject\n"
      "# variance). The group mean is the planted effect; age "
      "(centred) has none.\n";
  text += roi ? "# Run after `boldsum fit demo_roi.yaml`: boldsum pool "
                "group_roi.yaml\n"
                "input: results-roi/pool-ready/summaries.tsv\n"
              : "# Run after `boldsum fit demo.yaml`: boldsum pool group.yaml\n"
                "input: results/pool-ready\n";
  text +=
      "first_level_contrasts: [melodies_vs_rest, known_vs_new]\n"
      "participants: participants.tsv\n"
      "design: {intercept: true, covariates: [age]}\n"
      "contrasts:\n"
      "  group_mean: {intercept: 1}\n"
      "  age: {age: 1}\n"
      "method: mixed\n";
  text += roi ? "output: results-roi/group\n" : "output: results/group\n";
  return text;
}

}  // namespace boldsum
