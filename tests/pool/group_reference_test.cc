// configs/group_reference.yaml documents every key of the group config: it must load as
// it stands (given the data files it names), and it must mention every key the loader
// accepts, so that the two stay in step.
#include <gtest/gtest.h>

#include <fstream>
#include <sstream>

#include "boldsum/pool.h"
#include "pool/group_config.h"
#include "pool_test_dir.h"

#ifndef BOLDSUM_TEST_DATA_DIR
#error "BOLDSUM_TEST_DATA_DIR is defined by tests/CMakeLists.txt"
#endif

namespace boldsum {
namespace {

std::string ReferenceText() {
  // The test data folder sits in tests/, the configs at the top of the source tree.
  std::ifstream in(std::string(BOLDSUM_TEST_DATA_DIR) + "/../../configs/group_reference.yaml");
  std::stringstream text;
  text << in.rdbuf();
  return text.str();
}

TEST(GroupReferenceConfig, LoadsAsItStands) {
  const std::string reference = ReferenceText();
  ASSERT_FALSE(reference.empty());
  PoolTestDir dir;
  std::string summaries = "subject\tcontrast\tregion\testimate\tvariance\tdof\n";
  std::string participants = "participant_id\tage\tweekly_listening_hours\ttraining\n";
  for (int i = 1; i <= 6; ++i) {
    for (const char* contrast : {"melody", "melody_gt_silence"}) {
      summaries += "sub-" + std::to_string(i) + "\t" + contrast + "\tleft_auditory\t" +
                   std::to_string(0.1 * i) + "\t0.5\t120\n";
    }
    participants += std::to_string(i) + "\t" + std::to_string(20 + i) + "\t" +
                    std::to_string(i % 3) + "\t" + (i % 2 ? "musician" : "nonmusician") + "\n";
  }
  dir.Write("results/pool-ready/summaries.tsv", summaries);
  dir.Write("participants.tsv", participants);
  const LoadedGroupConfig loaded = dir.Load(reference);
  ASSERT_FALSE(loaded.diagnostics.HasErrors()) << dir.Messages(loaded)[0];
  EXPECT_EQ(loaded.spec.design.columns,
            (std::vector<std::string>{"intercept", "age", "weekly_listening_hours",
                                      "training_musician"}));
  EXPECT_EQ(loaded.spec.contrasts.size(), 4u);
  EXPECT_EQ(loaded.spec.output_dir, dir.Path("results/group"));
}

TEST(GroupReferenceConfig, DocumentsEveryKey) {
  const std::string reference = ReferenceText();
  const std::vector<std::string> keys = GroupConfigKeyPaths();
  EXPECT_GE(keys.size(), 14u);
  for (const std::string& key : keys) {
    EXPECT_NE(reference.find("# " + key + " ("), std::string::npos) << key;
  }
}

}  // namespace
}  // namespace boldsum
