// Internal: a temporary file beside a destination, renamed over it when complete.
#pragma once

#include <string>

namespace boldsum {

class TempFile {
 public:
  // Creates an empty file "<dir>/.<name>.tmp-XXXXXX<suffix>" in the folder of `path`
  // (<name> is path's file name without `suffix`), so that the rename stays within one
  // file system. `suffix` keeps the extension that decides a writer's format.
  // Throws Error("<path>: cannot create a temporary file in <dir> (<reason>)").
  TempFile(const std::string& path, const std::string& suffix);
  // Removes the temporary file unless Commit() succeeded.
  ~TempFile();
  TempFile(const TempFile&) = delete;
  TempFile& operator=(const TempFile&) = delete;

  const std::string& name() const { return name_; }
  // The descriptor of the open temporary file; -1 after CloseDescriptor().
  int fd() const { return fd_; }
  void CloseDescriptor();

  // Flushes the temporary file to disk (fsync), renames it over `path` and flushes the
  // folder. Throws Error on failure; the temporary file is then still removed.
  void Commit();

 private:
  std::string path_, name_;
  int fd_ = -1;
  bool committed_ = false;
};

// The folder part of `path` ("." when there is none).
std::string FolderOf(const std::string& path);

}  // namespace boldsum
