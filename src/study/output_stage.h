// A subject's outputs are written into a hidden staging folder beside OUT/<subject>
// and swapped into place only when all of them are complete, so an interrupted or
// failed run leaves the earlier results (or nothing) and never a partial set.
#pragma once

#include <string>

namespace boldsum {

class OutputStage {
 public:
  // Creates OUT/.<name>.staging-<pid>/ (removing a stale one of the same name).
  OutputStage(const std::string& root, const std::string& name);
  // Removes the staging folder unless Commit() succeeded.
  ~OutputStage();
  OutputStage(const OutputStage&) = delete;
  OutputStage& operator=(const OutputStage&) = delete;

  // Path of `relative` inside the staging folder; parent folders are created.
  std::string PathFor(const std::string& relative) const;

  // Path of folder `relative` inside the staging folder, created.
  std::string FolderFor(const std::string& relative) const;

  // Puts the existing file `from` at `relative` inside the staging folder: a hard link
  // (the file is not copied, and replacing the old folder leaves it intact), or a copy
  // where the file system has no hard links. Throws Error when neither works.
  void Adopt(const std::string& relative, const std::string& from) const;

  // Replaces OUT/<name> by the staging folder (old folder renamed aside, then removed).
  void Commit();

 private:
  std::string final_dir_;
  std::string staging_dir_;
  bool committed_ = false;
};

}  // namespace boldsum
