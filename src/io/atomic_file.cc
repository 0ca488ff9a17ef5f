#include "io/atomic_file.h"

#include <fcntl.h>
#include <sys/stat.h>
#include <unistd.h>

#include <algorithm>
#include <atomic>
#include <cerrno>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <random>

#include "boldsum/error.h"
#include "boldsum/io.h"

namespace boldsum {
namespace {

std::string Reason() { return std::strerror(errno); }

void SyncDescriptorOf(const std::string& name, int flags, const std::string& path) {
  const int fd = ::open(name.c_str(), flags | O_CLOEXEC);
  if (fd < 0) throw Error(path + ": cannot open " + name + " to flush it (" + Reason() + ")");
  const int result = ::fsync(fd);
  const std::string reason = Reason();
  ::close(fd);
  // Some file systems cannot flush a folder; only the file's own flush must succeed.
  if (result != 0 && (flags & O_DIRECTORY) == 0) {
    throw Error(path + ": cannot flush " + name + " to disk (" + reason + ")");
  }
}

}  // namespace

std::string FolderOf(const std::string& path) {
  const size_t slash = path.find_last_of('/');
  if (slash == std::string::npos) return ".";
  if (slash == 0) return "/";
  return path.substr(0, slash);
}

TempFile::TempFile(const std::string& path, const std::string& suffix) : path_(path) {
  const size_t slash = path.find_last_of('/');
  std::string base = slash == std::string::npos ? path : path.substr(slash + 1);
  if (base.size() >= suffix.size() &&
      base.compare(base.size() - suffix.size(), suffix.size(), suffix) == 0) {
    base.resize(base.size() - suffix.size());
  }
  const std::string folder = FolderOf(path);
  const std::string prefix =
      (slash == std::string::npos ? std::string() : path.substr(0, slash + 1)) + "." + base +
      ".tmp-";
  // O_EXCL with a fresh name per attempt: mode 0666 less the umask, like any new file
  // (mkstemp would give 0600).
  static std::atomic<unsigned> counter{0};
  static const unsigned seed = std::random_device{}();
  for (int attempt = 0; attempt < 100; ++attempt) {
    char tag[32];
    std::snprintf(tag, sizeof tag, "%d-%08x", static_cast<int>(::getpid()),
                  seed ^ (counter.fetch_add(1) * 2654435761u));
    name_ = prefix + tag + suffix;
    fd_ = ::open(name_.c_str(), O_WRONLY | O_CREAT | O_EXCL | O_CLOEXEC, 0666);
    if (fd_ >= 0) return;
    if (errno != EEXIST) break;
  }
  const std::string reason = Reason();
  name_.clear();
  throw Error(path + ": cannot create a temporary file in " + folder + " (" + reason + ")");
}

TempFile::~TempFile() {
  CloseDescriptor();
  if (!committed_ && !name_.empty()) ::unlink(name_.c_str());
}

void TempFile::CloseDescriptor() {
  if (fd_ >= 0) ::close(fd_);
  fd_ = -1;
}

void TempFile::Commit() {
  CloseDescriptor();
  SyncDescriptorOf(name_, O_RDONLY, path_);
  if (std::rename(name_.c_str(), path_.c_str()) != 0) {
    throw Error(path_ + ": cannot rename " + name_ + " to it (" + Reason() + ")");
  }
  committed_ = true;
  SyncDescriptorOf(FolderOf(path_), O_RDONLY | O_DIRECTORY, path_);
}

void WriteFileAtomically(const std::string& path, const std::string& contents) {
  TempFile temp(path, "");
  size_t written = 0;
  while (written < contents.size()) {
    const ssize_t n = ::write(temp.fd(), contents.data() + written, contents.size() - written);
    if (n < 0) {
      if (errno == EINTR) continue;
      throw Error(path + ": write error (" + Reason() + ")");
    }
    written += static_cast<size_t>(n);
  }
  temp.Commit();
}

std::string ReadFileBytes(const std::string& path) {
  // Read into a string of the file's size (grown only for files whose size the kernel
  // does not report, such as those under /proc): no growing buffer, no second copy.
  const int fd = ::open(path.c_str(), O_RDONLY | O_CLOEXEC);
  if (fd < 0) throw Error(path + ": cannot read the file (" + Reason() + ")");
  std::string bytes;
  struct stat info;
  if (::fstat(fd, &info) == 0) {
    if (S_ISDIR(info.st_mode)) {
      ::close(fd);
      throw Error(path + ": cannot read the file (it is a folder)");
    }
    if (S_ISREG(info.st_mode)) bytes.resize(static_cast<size_t>(info.st_size));
  }
  size_t filled = 0;
  for (;;) {
    if (filled == bytes.size()) bytes.resize(std::max<size_t>(bytes.size() * 2, 65536));
    const ssize_t n = ::read(fd, bytes.data() + filled, bytes.size() - filled);
    if (n < 0) {
      if (errno == EINTR) continue;
      const std::string reason = Reason();
      ::close(fd);
      throw Error(path + ": cannot read the file (" + reason + ")");
    }
    if (n == 0) break;
    filled += static_cast<size_t>(n);
  }
  ::close(fd);
  bytes.resize(filled);
  return bytes;
}

}  // namespace boldsum
