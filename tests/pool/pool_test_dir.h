// A fresh folder per test with a small ROI study of 8 synthetic volunteers (two
// first-level contrasts, three regions) and helpers to load a group config from it.
#pragma once

#include <gtest/gtest.h>

#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <map>
#include <sstream>
#include <string>
#include <vector>

#include "boldsum/pool.h"

namespace boldsum {

class PoolTestDir {
 public:
  PoolTestDir() {
    const char* base = std::getenv("BOLDSUM_TMP");
    const ::testing::TestInfo* test = ::testing::UnitTest::GetInstance()->current_test_info();
    std::string name = test ? std::string(test->test_suite_name()) + "." + test->name() : "x";
    for (char& c : name) {
      if (c == '/') c = '_';
    }
    root_ = std::filesystem::path(base ? base : ::testing::TempDir()) / "pool_tests" / name;
    std::filesystem::remove_all(root_);
    std::filesystem::create_directories(root_);
  }

  std::string Path(const std::string& relative) const { return (root_ / relative).string(); }

  void Write(const std::string& relative, const std::string& contents) const {
    std::filesystem::create_directories((root_ / relative).parent_path());
    std::ofstream(root_ / relative, std::ios::binary) << contents;
  }

  std::string Read(const std::string& relative) const {
    std::ifstream in(root_ / relative, std::ios::binary);
    std::stringstream text;
    text << in.rdbuf();
    return text.str();
  }

  // participants.tsv (ids with the sub- prefix) and summaries.tsv (ids without it).
  // Estimates follow a simple formula so that tests can rebuild them.
  void WriteRoiStudy() const {
    std::string participants = "participant_id\tage\ttraining\n";
    for (int i = 1; i <= 8; ++i) {
      participants += "sub-" + Id(i) + "\t" + std::to_string(20 + 3 * i) + "\t" +
                      (i % 2 ? "choir" : "none") + "\n";
    }
    Write("participants.tsv", participants);
    std::string summaries = "subject\tcontrast\tregion\testimate\tvariance\tdof\n";
    for (const char* contrast : {"melody", "rhythm"}) {
      for (int r = 0; r < 3; ++r) {
        for (int i = 1; i <= 8; ++i) {
          summaries += Id(i) + "\t" + contrast + "\tregion" + std::to_string(r) + "\t" +
                       Number(Estimate(i, r)) + "\t" + Number(Variance(i, r)) + "\t100\n";
        }
      }
    }
    Write("summaries.tsv", summaries);
  }

  static std::string Id(int i) { return "v" + std::to_string(i); }
  static double Estimate(int i, int r) { return 0.3 * r + 0.1 * i + ((i * 7 + r) % 5) * 0.4; }
  static double Variance(int i, int r) { return 0.2 + 0.05 * ((i + 2 * r) % 4); }
  static std::string Number(double x) {
    char text[32];
    std::snprintf(text, sizeof text, "%.17g", x);
    return text;
  }

  LoadedGroupConfig Load(const std::string& yaml) const {
    Write("group.yaml", yaml);
    return LoadGroupConfig(Path("group.yaml"));
  }

  // Every diagnostic as text, with this folder written "D".
  std::vector<std::string> Messages(const LoadedGroupConfig& loaded) const {
    std::vector<std::string> messages;
    for (const Diagnostic& d : loaded.diagnostics.all()) {
      std::string text = d.ToString();
      const std::string dir = root_.string();
      for (size_t at = text.find(dir); at != std::string::npos; at = text.find(dir, at + 1)) {
        text.replace(at, dir.size(), "D");
      }
      messages.push_back(text);
    }
    return messages;
  }

  std::vector<std::string> FilesUnder(const std::string& relative) const {
    std::vector<std::string> files;
    if (!std::filesystem::exists(root_ / relative)) return files;
    for (const auto& entry : std::filesystem::recursive_directory_iterator(root_ / relative)) {
      if (entry.is_regular_file()) files.push_back(entry.path().string());
    }
    return files;
  }

 private:
  std::filesystem::path root_;
};

}  // namespace boldsum
