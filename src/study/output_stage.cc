#include "study/output_stage.h"

#include <unistd.h>

#include <filesystem>

#include "boldsum/error.h"

namespace fs = std::filesystem;

namespace boldsum {

OutputStage::OutputStage(const std::string& root, const std::string& name) {
  const std::string pid = std::to_string(::getpid());
  final_dir_ = (fs::path(root) / name).string();
  staging_dir_ = (fs::path(root) / ("." + name + ".staging-" + pid)).string();
  std::error_code ec;
  fs::remove_all(staging_dir_, ec);
  fs::create_directories(staging_dir_, ec);
  if (ec) throw Error(staging_dir_ + ": cannot create output folder: " + ec.message());
}

OutputStage::~OutputStage() {
  if (committed_) return;
  std::error_code ec;
  fs::remove_all(staging_dir_, ec);
}

std::string OutputStage::PathFor(const std::string& relative) const {
  const fs::path path = fs::path(staging_dir_) / relative;
  std::error_code ec;
  fs::create_directories(path.parent_path(), ec);
  if (ec) throw Error(path.parent_path().string() + ": cannot create folder: " + ec.message());
  return path.string();
}

std::string OutputStage::FolderFor(const std::string& relative) const {
  const fs::path path = fs::path(staging_dir_) / relative;
  std::error_code ec;
  fs::create_directories(path, ec);
  if (ec) throw Error(path.string() + ": cannot create folder: " + ec.message());
  return path.string();
}

void OutputStage::Adopt(const std::string& relative, const std::string& from) const {
  const std::string to = PathFor(relative);
  std::error_code ec;
  fs::create_hard_link(from, to, ec);
  if (!ec) return;
  fs::copy_file(from, to, fs::copy_options::overwrite_existing, ec);
  if (ec) throw Error(to + ": cannot take over " + from + ": " + ec.message());
}

void OutputStage::Commit() {
  std::error_code ec;
  const std::string aside = staging_dir_ + ".old";
  fs::remove_all(aside, ec);
  const bool had_old = fs::exists(final_dir_);
  if (had_old) {
    fs::rename(final_dir_, aside, ec);
    if (ec) throw Error(final_dir_ + ": cannot replace earlier results: " + ec.message());
  }
  fs::rename(staging_dir_, final_dir_, ec);
  if (ec) {
    if (had_old) fs::rename(aside, final_dir_, ec);
    throw Error(final_dir_ + ": cannot move new results into place: " + ec.message());
  }
  committed_ = true;
  if (had_old) fs::remove_all(aside, ec);
}

}  // namespace boldsum
