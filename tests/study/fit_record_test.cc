// fit_params.bin: a record read back equals the one written, bit for bit; a damaged
// file (wrong magic, cut short, impossible counts, trailing bytes, a folder) is refused
// with its path and what is wrong, never read past its end.
#include "study/fit_record.h"

#include <gtest/gtest.h>
#include <unistd.h>

#include <cstdlib>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <string>

#include "boldsum/error.h"

namespace boldsum {
namespace {

namespace fs = std::filesystem;

class ScratchFolder {
 public:
  ScratchFolder() {
    const char* base = std::getenv("BOLDSUM_TMP");
    fs::path root = base != nullptr ? fs::path(base) : fs::temp_directory_path();
    fs::create_directories(root);
    std::string pattern = (root / "fit_record_XXXXXX").string();
    path_ = ::mkdtemp(pattern.data()) != nullptr ? pattern : "";
  }
  ~ScratchFolder() {
    std::error_code ignored;
    fs::remove_all(path_, ignored);
  }
  std::string operator/(const std::string& name) const { return path_ + "/" + name; }

 private:
  std::string path_;
};

void Write(const std::string& path, const std::string& bytes) {
  std::ofstream(path, std::ios::binary) << bytes;
}

std::string ErrorOf(const std::string& path) {
  try {
    LoadFitRecord(path);
  } catch (const Error& e) {
    return e.what();
  }
  return "(no error)";
}

// Two runs with every field set to values that show up if a byte moves.
FitRecord Example() {
  FitRecord record;
  record.voxels = {3, 17, 40};
  for (int r = 0; r < 2; ++r) {
    RunFit run;
    run.n_volumes = 50 + r;
    run.rank = 3;
    run.dof = run.n_volumes - 3;
    run.n_nonfinite = r;
    run.n_constant = 2 * r;
    run.kept_columns = {0, 2, 3};
    run.gram.xtx = Eigen::MatrixXd::Random(4, 4);
    run.gram.lag = Eigen::MatrixXd::Random(4, 4);
    run.gram.ends = Eigen::MatrixXd::Random(4, 4);
    run.beta = Eigen::MatrixXd::Random(4, 3);
    run.sigma2 = Eigen::VectorXd::Random(3).cwiseAbs();
    run.rho = Eigen::VectorXd::Random(3) * 0.5;
    run.valid = {1, 0, 1};
    record.runs.push_back(run);
  }
  return record;
}

TEST(FitRecord, RoundTripIsExact) {
  ScratchFolder dir;
  const FitRecord written = Example();
  const std::string bytes = SerializeFitRecord(written);
  EXPECT_EQ(bytes, SerializeFitRecord(written.voxels, written.runs));
  Write(dir / "fit_params.bin", bytes);
  const FitRecord read = LoadFitRecord(dir / "fit_params.bin");
  EXPECT_EQ(read.voxels, written.voxels);
  ASSERT_EQ(read.runs.size(), 2u);
  for (size_t r = 0; r < 2; ++r) {
    const RunFit& a = written.runs[r];
    const RunFit& b = read.runs[r];
    EXPECT_EQ(b.n_volumes, a.n_volumes);
    EXPECT_EQ(b.dof, a.dof);
    EXPECT_EQ(b.n_nonfinite, a.n_nonfinite);
    EXPECT_EQ(b.n_constant, a.n_constant);
    EXPECT_EQ(b.kept_columns, a.kept_columns);
    EXPECT_EQ(b.gram.xtx, a.gram.xtx);
    EXPECT_EQ(b.gram.lag, a.gram.lag);
    EXPECT_EQ(b.gram.ends, a.gram.ends);
    EXPECT_EQ(b.beta, a.beta);
    EXPECT_EQ(b.sigma2, a.sigma2);
    EXPECT_EQ(b.rho, a.rho);
    EXPECT_EQ(b.valid, a.valid);
  }
  EXPECT_EQ(SerializeFitRecord(read), bytes);
}

TEST(FitRecord, DamagedFilesAreRefused) {
  ScratchFolder dir;
  const std::string bytes = SerializeFitRecord(Example());
  const std::string path = dir / "fit_params.bin";

  Write(path, "");
  EXPECT_NE(ErrorOf(path).find("not a boldsum fit record"), std::string::npos);
  Write(path, "boldsum-fit-record-0\n" + bytes.substr(21));
  EXPECT_NE(ErrorOf(path).find("not a boldsum fit record"), std::string::npos);
  // Cut anywhere after the magic: truncated or corrupt, never a crash or a partial record.
  for (size_t cut : {size_t{21}, size_t{25}, size_t{40}, bytes.size() / 2, bytes.size() - 1}) {
    SCOPED_TRACE("cut at " + std::to_string(cut));
    Write(path, bytes.substr(0, cut));
    const std::string error = ErrorOf(path);
    EXPECT_EQ(error.find(path), 0u) << error;
    EXPECT_TRUE(error.find("truncated") != std::string::npos ||
                error.find("corrupt") != std::string::npos)
        << error;
  }
  // A voxel count far beyond what the file holds.
  std::string huge = bytes;
  const int64_t count = int64_t{1} << 40;
  std::memcpy(huge.data() + 21, &count, sizeof count);
  Write(path, huge);
  EXPECT_NE(ErrorOf(path).find("fit record is corrupt"), std::string::npos);
  Write(path, bytes + "x");
  EXPECT_NE(ErrorOf(path).find("trailing bytes"), std::string::npos);
  EXPECT_NE(ErrorOf(dir / "missing.bin").find("cannot read the saved fit"), std::string::npos);
  fs::create_directories(dir / "folder.bin");
  EXPECT_NE(ErrorOf(dir / "folder.bin").find("cannot read the saved fit"), std::string::npos);
}

}  // namespace
}  // namespace boldsum
