#include "study/fit_record.h"

#include <cstring>

#include "boldsum/error.h"
#include "boldsum/io.h"
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

class Reader {
 public:
  Reader(std::string path, std::string bytes) : path_(std::move(path)), bytes_(std::move(bytes)) {}
  template <typename T>
  T Get() {
    T value;
    GetArray(&value, 1);
    return value;
  }
  template <typename T>
  void GetArray(T* data, size_t count) {
    const size_t size = sizeof(T) * count;
    if (size > bytes_.size() - offset_) throw Error(path_ + ": fit record is truncated");
    std::memcpy(data, bytes_.data() + offset_, size);
    offset_ += size;
  }
  Eigen::MatrixXd GetMatrix() {
    const auto rows = Get<int64_t>();
    const auto cols = Get<int64_t>();
    if (rows < 0 || cols < 0 || rows * cols * 8 > static_cast<int64_t>(bytes_.size())) {
      throw Error(path_ + ": fit record is corrupt");
    }
    Eigen::MatrixXd m(rows, cols);
    GetArray(m.data(), static_cast<size_t>(m.size()));
    return m;
  }
  bool AtEnd() const { return offset_ == bytes_.size(); }

 private:
  std::string path_;
  std::string bytes_;
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
  std::string bytes;
  try {
    bytes = ReadFileBytes(path);
  } catch (const Error&) {
    throw Error(path + ": cannot read the saved fit");
  }
  if (bytes.compare(0, sizeof kMagic - 1, kMagic) != 0) {
    throw Error(path + ": not a boldsum fit record (or of another version)");
  }
  Reader in(path, bytes.substr(sizeof kMagic - 1));
  FitRecord record;
  record.voxels.resize(static_cast<size_t>(in.Get<int64_t>()));
  in.GetArray(record.voxels.data(), record.voxels.size());
  record.runs.resize(static_cast<size_t>(in.Get<int64_t>()));
  for (RunFit& run : record.runs) {
    for (int* value : {&run.n_volumes, &run.rank, &run.dof, &run.n_nonfinite, &run.n_constant}) {
      *value = in.Get<int32_t>();
    }
    run.kept_columns.resize(static_cast<size_t>(in.Get<int64_t>()));
    for (int& column : run.kept_columns) column = in.Get<int32_t>();
    run.gram.xtx = in.GetMatrix();
    run.gram.lag = in.GetMatrix();
    run.gram.ends = in.GetMatrix();
    run.beta = in.GetMatrix();
    run.sigma2 = in.GetMatrix();
    run.rho = in.GetMatrix();
    run.valid.resize(static_cast<size_t>(in.Get<int64_t>()));
    in.GetArray(run.valid.data(), run.valid.size());
  }
  if (!in.AtEnd()) throw Error(path + ": fit record has trailing bytes");
  return record;
}

}  // namespace boldsum
