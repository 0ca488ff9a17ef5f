#include "study/fit_record.h"

#include <fcntl.h>
#include <sys/stat.h>
#include <unistd.h>

#include <cerrno>
#include <cstring>

#include "boldsum/error.h"
#include "common/huge_pages.h"

namespace boldsum {
namespace {

constexpr char kMagic[] = "boldsum-fit-record-1\n";

class Writer {
 public:
  template <typename T>
  void Put(const T& value) {
    bytes_.append(reinterpret_cast<const char*>(&value), sizeof(T));
  }
  template <typename T>
  void PutArray(const T* data, size_t count) {
    bytes_.append(reinterpret_cast<const char*>(data), sizeof(T) * count);
  }
  void PutMatrix(const Eigen::MatrixXd& m) {
    Put<int64_t>(m.rows());
    Put<int64_t>(m.cols());
    PutArray(m.data(), static_cast<size_t>(m.size()));
  }
  std::string& bytes() { return bytes_; }
  // One allocation of the final size, on huge pages where the kernel grants them.
  void Reserve(size_t size) {
    bytes_.reserve(size);
    AdviseHugePages(bytes_.data(), size);
  }

 private:
  std::string bytes_;
};

// Reads the record straight from the file into each destination (no copy of the
// whole file in between), the large arrays on huge pages where the kernel grants them.
class Reader {
 public:
  explicit Reader(std::string path) : path_(std::move(path)) {
    fd_ = ::open(path_.c_str(), O_RDONLY | O_CLOEXEC);
    struct stat info;
    if (fd_ < 0 || ::fstat(fd_, &info) != 0 || !S_ISREG(info.st_mode)) {
      Close();
      throw Error(path_ + ": cannot read the saved fit");
    }
    size_ = static_cast<size_t>(info.st_size);
  }
  ~Reader() { Close(); }
  Reader(const Reader&) = delete;
  Reader& operator=(const Reader&) = delete;

  template <typename T>
  T Get() {
    T value;
    GetArray(&value, 1);
    return value;
  }
  template <typename T>
  void GetArray(T* data, size_t count) {
    const size_t size = sizeof(T) * count;
    if (size > size_ - offset_) throw Error(path_ + ": fit record is truncated");
    char* out = reinterpret_cast<char*>(data);
    for (size_t done = 0; done < size;) {
      const ssize_t n = ::read(fd_, out + done, size - done);
      if (n < 0 && errno == EINTR) continue;
      if (n < 0) throw Error(path_ + ": cannot read the saved fit");
      if (n == 0) throw Error(path_ + ": fit record is truncated");
      done += static_cast<size_t>(n);
    }
    offset_ += size;
  }
  Eigen::MatrixXd GetMatrix() {
    const auto rows = Get<int64_t>();
    const auto cols = Get<int64_t>();
    if (rows < 0 || cols < 0 || (cols > 0 && rows > static_cast<int64_t>(size_) / 8 / cols)) {
      throw Error(path_ + ": fit record is corrupt");
    }
    Eigen::MatrixXd m(rows, cols);
    AdviseHugePages(m.data(), sizeof(double) * static_cast<size_t>(m.size()));
    GetArray(m.data(), static_cast<size_t>(m.size()));
    return m;
  }
  // A count of elements of `element_bytes` bytes that the rest of the file can hold.
  size_t Count(size_t element_bytes) {
    const auto count = Get<int64_t>();
    if (count < 0 || static_cast<uint64_t>(count) > (size_ - offset_) / element_bytes) {
      throw Error(path_ + ": fit record is corrupt");
    }
    return static_cast<size_t>(count);
  }
  bool AtEnd() const { return offset_ == size_; }

 private:
  void Close() {
    if (fd_ >= 0) ::close(fd_);
    fd_ = -1;
  }

  std::string path_;
  int fd_ = -1;
  size_t size_ = 0;
  size_t offset_ = 0;
};

}  // namespace

std::string SerializeFitRecord(const FitRecord& record) {
  return SerializeFitRecord(record.voxels, record.runs);
}

std::string SerializeFitRecord(const std::vector<int64_t>& voxels,
                               const std::vector<RunFit>& runs) {
  const auto matrix_bytes = [](const auto& m) {
    return 16 + sizeof(double) * static_cast<size_t>(m.size());
  };
  size_t size = sizeof kMagic - 1 + 8 + 8 * voxels.size() + 8;
  for (const RunFit& run : runs) {
    size += 5 * 4 + 8 + 4 * run.kept_columns.size() + matrix_bytes(run.gram.xtx) +
            matrix_bytes(run.gram.lag) + matrix_bytes(run.gram.ends) + matrix_bytes(run.beta) +
            matrix_bytes(run.sigma2) + matrix_bytes(run.rho) + 8 + run.valid.size();
  }
  Writer out;
  out.Reserve(size);
  out.PutArray(kMagic, sizeof kMagic - 1);
  out.Put<int64_t>(static_cast<int64_t>(voxels.size()));
  out.PutArray(voxels.data(), voxels.size());
  out.Put<int64_t>(static_cast<int64_t>(runs.size()));
  for (const RunFit& run : runs) {
    for (int value : {run.n_volumes, run.rank, run.dof, run.n_nonfinite, run.n_constant}) {
      out.Put<int32_t>(value);
    }
    out.Put<int64_t>(static_cast<int64_t>(run.kept_columns.size()));
    for (int column : run.kept_columns) out.Put<int32_t>(column);
    out.PutMatrix(run.gram.xtx);
    out.PutMatrix(run.gram.lag);
    out.PutMatrix(run.gram.ends);
    out.PutMatrix(run.beta);
    out.PutMatrix(run.sigma2);
    out.PutMatrix(run.rho);
    out.Put<int64_t>(static_cast<int64_t>(run.valid.size()));
    out.PutArray(run.valid.data(), run.valid.size());
  }
  return std::move(out.bytes());
}

FitRecord LoadFitRecord(const std::string& path) {
  Reader in(path);
  char magic[sizeof kMagic - 1] = {};
  bool is_record = false;
  try {
    in.GetArray(magic, sizeof magic);
    is_record = std::memcmp(magic, kMagic, sizeof magic) == 0;
  } catch (const Error&) {
  }
  if (!is_record) throw Error(path + ": not a boldsum fit record (or of another version)");
  FitRecord record;
  record.voxels.resize(in.Count(sizeof(int64_t)));
  in.GetArray(record.voxels.data(), record.voxels.size());
  record.runs.resize(in.Count(5 * sizeof(int32_t)));
  for (RunFit& run : record.runs) {
    for (int* value : {&run.n_volumes, &run.rank, &run.dof, &run.n_nonfinite, &run.n_constant}) {
      *value = in.Get<int32_t>();
    }
    run.kept_columns.resize(in.Count(sizeof(int32_t)));
    for (int& column : run.kept_columns) column = in.Get<int32_t>();
    run.gram.xtx = in.GetMatrix();
    run.gram.lag = in.GetMatrix();
    run.gram.ends = in.GetMatrix();
    run.beta = in.GetMatrix();
    run.sigma2 = in.GetMatrix();
    run.rho = in.GetMatrix();
    run.valid.resize(in.Count(1));
    in.GetArray(run.valid.data(), run.valid.size());
  }
  if (!in.AtEnd()) throw Error(path + ": fit record has trailing bytes");
  return record;
}

}  // namespace boldsum
