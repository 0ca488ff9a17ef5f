// configs/reference.yaml documents every key the loader accepts (and no other), and is
// itself a valid config apart from the data files it names.
#include <gtest/gtest.h>

#include <fstream>
#include <regex>
#include <set>
#include <sstream>

#include "boldsum/config.h"
#include "config/keys.h"

namespace boldsum {
namespace {

const std::string kReference = std::string(BOLDSUM_TEST_DATA_DIR) + "/../../configs/reference.yaml";

std::set<std::string> AllowedKeyPaths() {
  std::set<std::string> paths;
  for (const config::KeyLevel* level : config::AllKeyLevels()) {
    for (const config::KeyRule& rule : level->keys) {
      paths.insert(level->path.empty() ? rule.name : level->path + "." + rule.name);
    }
  }
  return paths;
}

// Key paths documented by comments of the form "# <path> (<type>; <default>): <meaning>",
// the parenthesis on the comment's first line.
std::set<std::string> DocumentedKeyPaths() {
  std::ifstream in(kReference);
  EXPECT_TRUE(in.good()) << kReference;
  const std::regex doc(R"(^\s*# ((?:[a-z_]|\[\]|\.|<trial type>)+) \([^()]*\):( |$))");
  std::set<std::string> paths;
  std::string line;
  while (std::getline(in, line)) {
    std::smatch match;
    if (std::regex_search(line, match, doc)) paths.insert(match[1]);
  }
  return paths;
}

TEST(ReferenceConfig, DocumentsExactlyTheAcceptedKeys) {
  const std::set<std::string> allowed = AllowedKeyPaths();
  const std::set<std::string> documented = DocumentedKeyPaths();
  for (const std::string& path : allowed) {
    EXPECT_EQ(documented.count(path), 1u) << "not documented: " << path;
  }
  for (const std::string& path : documented) {
    EXPECT_EQ(allowed.count(path), 1u) << "documented but not accepted: " << path;
  }
}

TEST(ReferenceConfig, LoadsApartFromTheMissingDataFiles) {
  const LoadedConfig loaded = LoadConfig(kReference);
  int missing = 0;
  for (const Diagnostic& d : loaded.diagnostics.all()) {
    if (d.severity == Severity::kWarning) continue;
    EXPECT_NE(d.message.find("' not found (looked for "), std::string::npos) << d.ToString();
    ++missing;
  }
  // mask, run 1 data, events and confounds, run 2 data and confounds, participants.
  EXPECT_EQ(missing, 7);
}

}  // namespace
}  // namespace boldsum
