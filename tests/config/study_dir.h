// A fresh folder per test holding a config and the small files it names, and a loader
// that checks LoadConfig left the folder exactly as it was (no output, no temporary).
#pragma once

#include <gtest/gtest.h>

#include <chrono>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <map>
#include <string>
#include <vector>

#include "boldsum/config.h"

namespace boldsum {

// Exact equality, for comparing loaded events (found by argument-dependent lookup).
inline bool operator==(const Event& a, const Event& b) {
  return a.onset_s == b.onset_s && a.duration_s == b.duration_s && a.amplitude == b.amplitude;
}

namespace testing {

// Events table used by most configs: every condition once, all on valid cells.
inline constexpr const char* kEventsTsv =
    "onset\tduration\ttrial_type\n"
    "2.0\t4.0\tmelody_known\n"
    "10.0\t4.0\tmelody_new\n"
    "15.5\t0\tpress\n";

inline constexpr const char* kConfoundsTsv =
    "shift_x\tshift_y\tshift_z\tdisplacement\n"
    "0.0\t0.0\t0.0\tn/a\n"
    "0.01\t-0.02\t0.0\t0.1\n";

class StudyDir {
 public:
  StudyDir() {
    const char* base = std::getenv("BOLDSUM_TMP");
    const ::testing::TestInfo* test = ::testing::UnitTest::GetInstance()->current_test_info();
    std::string name = test ? std::string(test->test_suite_name()) + "." + test->name() : "x";
    for (char& c : name) {
      if (c == '/') c = '_';
    }
    root_ = std::filesystem::path(base ? base : ::testing::TempDir()) / "config_tests" / name;
    std::filesystem::remove_all(root_);
    std::filesystem::create_directories(root_);
    Write("run1.nii.gz", "placeholder\n");
    Write("run1_events.tsv", kEventsTsv);
    Write("run1_confounds.tsv", kConfoundsTsv);
  }

  std::string Path(const std::string& relative) const { return (root_ / relative).string(); }
  std::string ConfigPath() const { return Path("study.yaml"); }

  void Write(const std::string& relative, const std::string& contents) const {
    std::filesystem::create_directories((root_ / relative).parent_path());
    std::ofstream(root_ / relative, std::ios::binary) << contents;
  }

  // Writes study.yaml and loads it; fails the test if loading changed the folder.
  LoadedConfig Load(const std::string& yaml) const {
    Write("study.yaml", yaml);
    const auto before = Snapshot();
    LoadedConfig loaded = LoadConfig(ConfigPath());
    EXPECT_EQ(Snapshot(), before) << "LoadConfig changed files under " << root_;
    return loaded;
  }

  // Every diagnostic as "file:line:col: error: message", with this folder written "D".
  std::vector<std::string> Messages(const LoadedConfig& loaded) const {
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

  std::vector<std::string> LoadMessages(const std::string& yaml) const {
    return Messages(Load(yaml));
  }

 private:
  std::map<std::string, std::pair<uintmax_t, std::filesystem::file_time_type>> Snapshot() const {
    std::map<std::string, std::pair<uintmax_t, std::filesystem::file_time_type>> files;
    for (const auto& entry : std::filesystem::recursive_directory_iterator(root_)) {
      const uintmax_t size = entry.is_regular_file() ? entry.file_size() : 0;
      files[entry.path().string()] = {size, entry.last_write_time()};
    }
    return files;
  }

  std::filesystem::path root_;
};

}  // namespace testing
}  // namespace boldsum
