// Helpers shared by the design tests: a small model and run, and temporary files.
#pragma once

#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <string>

#include "boldsum/config.h"
#include "boldsum/design.h"

namespace boldsum::testing {

// Two conditions of a synthetic melody-listening run, TR 2 s, cosine drift at 128 s.
inline ModelSpec MelodyModel() {
  ModelSpec model;
  model.tr_s = 2.0;
  model.slice_reference = 0.5;
  model.conditions = {"melody", "silence"};
  return model;
}

inline RunSpec MelodyRun() {
  RunSpec run;
  run.where = {"study.yaml", 12, 7};
  run.events["melody"] = {{10.0, 8.0, 1.0}, {60.0, 8.0, 1.0}, {110.0, 8.0, 1.0}};
  run.events["silence"] = {{30.0, 8.0, 1.0}, {85.0, 8.0, 1.0}, {140.0, 8.0, 1.0}};
  return run;
}

// A fresh file under $BOLDSUM_TMP (or /tmp) holding `contents`; returns its path.
inline std::string WriteTempFile(const std::string& name, const std::string& contents) {
  const char* base = std::getenv("BOLDSUM_TMP");
  const std::string dir = base != nullptr ? base : "/tmp";
  std::filesystem::create_directories(dir);
  const std::string path = dir + "/design_test_" + name;
  std::ofstream(path, std::ios::binary) << contents;
  return path;
}

}  // namespace boldsum::testing
