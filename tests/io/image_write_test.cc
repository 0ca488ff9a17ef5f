// WriteImage: round trips through boldsum's reader, the header bytes against the
// NIfTI-1 standard's layout (nifti1.h), and failures that must leave `path` untouched.
// tests/reference/test_nifti_io.py reads the same output with nibabel.
#include <gtest/gtest.h>
#include <signal.h>
#include <sys/resource.h>

#include <cmath>
#include <limits>
#include <thread>

#include "boldsum/io.h"
#include "nifti_files.h"

namespace boldsum {
namespace {

using testing::ErrorOf;
using testing::ScratchDir;

ImageGeometry Oblique(int n_volumes) {
  ImageGeometry g;
  g.dims = {5, 4, 3};
  g.n_volumes = n_volumes;
  g.voxel_mm = {2.0, 2.5, 3.25};
  g.tr_s = 1.5;
  g.qform_code = 1;
  g.sform_code = 4;
  g.quatern_b = 0.125;
  g.quatern_c = -0.25;
  g.quatern_d = 0.0625;
  g.qoffset_x = -90.5;
  g.qoffset_y = 126;
  g.qoffset_z = -72.25;
  g.qfac = -1;
  g.srow = {{{-2, 0.125, 0, 90}, {0.0625, 2.5, 0, -126}, {0, 0, 3.25, -72}}};
  return g;
}

std::vector<float> Values(int64_t count) {
  std::vector<float> v;
  for (int64_t i = 0; i < count; ++i) v.push_back(static_cast<float>(i) * 0.37f - 3.0f);
  v[1] = std::numeric_limits<float>::quiet_NaN();
  v[2] = std::numeric_limits<float>::infinity();
  v[3] = -0.0f;
  v[4] = 1e-42f;  // subnormal
  return v;
}

bool SameFloats(const std::vector<float>& a, const std::vector<float>& b) {
  return a.size() == b.size() && std::memcmp(a.data(), b.data(), a.size() * sizeof(float)) == 0;
}

std::vector<float> ReadAll(const std::string& path) {
  const ImageGeometry g = ReadImageGeometry(path);
  std::vector<int64_t> voxels(static_cast<size_t>(g.n_voxels()));
  for (size_t i = 0; i < voxels.size(); ++i) voxels[i] = static_cast<int64_t>(i);
  VolumeStream stream(path, voxels, 2);
  std::vector<float> out;
  Eigen::MatrixXf m;
  while (stream.Next(&m)) {
    for (Eigen::Index t = 0; t < m.rows(); ++t) {
      for (Eigen::Index j = 0; j < m.cols(); ++j) out.push_back(m(t, j));
    }
  }
  return out;
}

TEST(WriteImage, RoundTrips) {
  ScratchDir dir;
  for (int n_volumes : {1, 3}) {
    for (const char* name : {"out.nii", "out.nii.gz"}) {
      SCOPED_TRACE(std::string(name) + " volumes " + std::to_string(n_volumes));
      const ImageGeometry g = Oblique(n_volumes);
      const std::vector<float> values = Values(g.n_voxels() * n_volumes);
      const std::string path = dir / name;
      WriteImage(path, g, values, n_volumes);
      EXPECT_TRUE(SameFloats(ReadAll(path), values));  // bitwise: NaN, -0, subnormal kept
      const ImageGeometry back = ReadImageGeometry(path);
      EXPECT_TRUE(back.SameSpace(g));
      EXPECT_EQ(back.n_volumes, n_volumes);
      EXPECT_EQ(back.nifti_version, 1);
      EXPECT_EQ(back.qform_code, 1);
      EXPECT_EQ(back.sform_code, 4);
      EXPECT_EQ(back.tr_s, n_volumes > 1 ? 1.5 : 0.0);
      EXPECT_EQ(dir.Entries(), std::vector<std::string>{name});  // no temporary left
      std::remove(path.c_str());
    }
  }
}

// Images above 64 MiB are written by another route (nifticlib streaming through zlib)
// than smaller ones (one libdeflate buffer): the same header and values either way.
TEST(WriteImage, LargeAndSmallImagesRoundTripAlike) {
  ScratchDir dir;
  ImageGeometry g = Oblique(1);
  g.dims = {64, 64, 64};
  const int n_volumes = 65;  // 64 MiB + 352 header bytes + one volume
  std::vector<float> values = Values(g.n_voxels() * n_volumes);
  for (const char* name : {"big.nii", "big.nii.gz"}) {
    SCOPED_TRACE(name);
    const std::string big = dir / name;
    WriteImage(big, g, values, n_volumes);
    EXPECT_TRUE(SameFloats(ReadAll(big), values));
    const std::string small = dir / (std::string("small") + (name + 3));
    const std::vector<float> first(values.begin(), values.begin() + 5 * g.n_voxels());
    WriteImage(small, g, first, 5);
    EXPECT_TRUE(SameFloats(ReadAll(small), first));
    // Headers equal but for dim[4] (and so dim[0] stays 4).
    nifti_1_header hb, hs;
    const std::string bb = testing::ReadBytes(big), bs = testing::ReadBytes(small);
    if (std::string(name).size() < 8) {  // .nii: compare the raw header bytes
      std::memcpy(&hb, bb.data(), sizeof hb);
      std::memcpy(&hs, bs.data(), sizeof hs);
      hb.dim[4] = hs.dim[4];
      EXPECT_EQ(std::memcmp(&hb, &hs, sizeof hb), 0);
      EXPECT_EQ(bb.substr(348, 4), bs.substr(348, 4));
    }
    std::remove(big.c_str());
    std::remove(small.c_str());
  }
}

// The first bytes of the output, decoded per the NIfTI-1 header layout.
TEST(WriteImage, HeaderIsNifti1Float32) {
  ScratchDir dir;
  const ImageGeometry g = Oblique(2);
  WriteImage(dir / "h.nii", g, Values(g.n_voxels() * 2), 2);
  const std::string bytes = testing::ReadBytes(dir / "h.nii");
  ASSERT_GE(bytes.size(), sizeof(nifti_1_header));
  nifti_1_header h;
  std::memcpy(&h, bytes.data(), sizeof h);
  EXPECT_EQ(h.sizeof_hdr, 348);
  EXPECT_STREQ(h.magic, "n+1");
  EXPECT_EQ(h.datatype, DT_FLOAT32);
  EXPECT_EQ(h.bitpix, 32);
  EXPECT_EQ(h.dim[0], 4);
  EXPECT_EQ(h.dim[1], 5);
  EXPECT_EQ(h.dim[4], 2);
  EXPECT_EQ(h.pixdim[0], -1.0f);
  EXPECT_EQ(h.pixdim[3], 3.25f);
  EXPECT_EQ(h.pixdim[4], 1.5f);
  EXPECT_EQ(h.xyzt_units, NIFTI_UNITS_MM | NIFTI_UNITS_SEC);
  EXPECT_EQ(h.vox_offset, 352.0f);
  EXPECT_EQ(bytes.size(), 352u + 5 * 4 * 3 * 2 * 4);
  EXPECT_EQ(h.srow_x[3], 90.0f);
  EXPECT_EQ(h.quatern_b, 0.125f);
}

TEST(WriteImage, ReplacesAnExistingFile) {
  ScratchDir dir;
  const ImageGeometry g = Oblique(1);
  const std::string path = dir / "r.nii.gz";
  testing::WriteBytes(dir / "r.nii", "old");
  std::ofstream(path) << "old";
  WriteImage(path, g, Values(g.n_voxels()), 1);
  EXPECT_TRUE(SameFloats(ReadVolume(path, nullptr), Values(g.n_voxels())));
  EXPECT_EQ(dir.Entries(), (std::vector<std::string>{"r.nii", "r.nii.gz"}));
}

TEST(WriteImage, BadArguments) {
  ScratchDir dir;
  const ImageGeometry g = Oblique(1);
  const std::string img = dir / "x.img";
  EXPECT_EQ(ErrorOf([&] { WriteImage(img, g, Values(60), 1); }),
            img + ": an output image name must end in .nii or .nii.gz");
  const std::string nii = dir / "x.nii";
  EXPECT_EQ(ErrorOf([&] { WriteImage(nii, g, Values(59), 1); }),
            nii + ": 59 values given for 1 volume(s) of 60 voxels");
  EXPECT_TRUE(dir.Entries().empty());
  const std::string nowhere = dir / "missing/x.nii";
  EXPECT_EQ(ErrorOf([&] { WriteImage(nowhere, g, Values(60), 1); }),
            nowhere + ": cannot create a temporary file in " + dir / "missing" +
                " (No such file or directory)");
}

// Simulated disk full: a file-size limit makes writes beyond 4 KiB fail (EFBIG), even for
// root. The old file must survive and no temporary may be left.
class FileSizeLimit {
 public:
  explicit FileSizeLimit(rlim_t bytes) {
    getrlimit(RLIMIT_FSIZE, &saved_);
    old_handler_ = signal(SIGXFSZ, SIG_IGN);
    struct rlimit limit = saved_;
    limit.rlim_cur = bytes;
    setrlimit(RLIMIT_FSIZE, &limit);
  }
  ~FileSizeLimit() {
    setrlimit(RLIMIT_FSIZE, &saved_);
    signal(SIGXFSZ, old_handler_);
  }

 private:
  struct rlimit saved_;
  sighandler_t old_handler_;
};

TEST(WriteImage, FailedWriteLeavesTheOldFile) {
  ScratchDir dir;
  ImageGeometry g = Oblique(1);
  g.dims = {32, 32, 8};
  for (const char* name : {"f.nii", "f.nii.gz"}) {
    const std::string path = dir / name;
    std::ofstream(path) << "old contents";
    std::string message;
    {
      FileSizeLimit limit(4096);
      message = ErrorOf([&] { WriteImage(path, g, Values(g.n_voxels() * 4), 4); });
    }
    EXPECT_EQ(message, path + ": write error (File too large)");
    EXPECT_EQ(testing::ReadBytes(path), "old contents");
  }
  EXPECT_EQ(dir.Entries(), (std::vector<std::string>{"f.nii", "f.nii.gz"}));
}

// Outputs are written from several threads at once (one per subject); nifticlib's global
// state must not mix them up.
TEST(WriteImage, ConcurrentWritersAndReaders) {
  ScratchDir dir;
  const ImageGeometry g = Oblique(2);
  std::vector<std::thread> threads;
  std::vector<int> good(4, 0);
  for (int k = 0; k < 4; ++k) {
    threads.emplace_back([&, k] {
      for (int i = 0; i < 6; ++i) {
        const std::string path = dir / ("t" + std::to_string(k) + "_" + std::to_string(i) +
                                        (i % 2 ? ".nii.gz" : ".nii"));
        std::vector<float> values = Values(g.n_voxels() * 2);
        values[0] = static_cast<float>(100 * k + i);
        WriteImage(path, g, values, 2);
        good[static_cast<size_t>(k)] += SameFloats(ReadAll(path), values);
      }
    });
  }
  for (std::thread& t : threads) t.join();
  EXPECT_EQ(good, std::vector<int>(4, 6));
  EXPECT_EQ(dir.Entries().size(), 24u);
}

TEST(WriteFileAtomically, WritesAndReplaces) {
  ScratchDir dir;
  const std::string path = dir / "summary.json";
  WriteFileAtomically(path, "first");
  EXPECT_EQ(testing::ReadBytes(path), "first");
  const std::string binary("a\0b\n", 4);
  WriteFileAtomically(path, binary);
  EXPECT_EQ(testing::ReadBytes(path), binary);
  WriteFileAtomically(path, "");
  EXPECT_EQ(testing::ReadBytes(path), "");
  EXPECT_EQ(dir.Entries(), std::vector<std::string>{"summary.json"});
}

TEST(WriteFileAtomically, FailureLeavesTheOldFile) {
  ScratchDir dir;
  const std::string path = dir / "table.tsv";
  WriteFileAtomically(path, "old");
  std::string message;
  {
    FileSizeLimit limit(10);
    message = ErrorOf([&] { WriteFileAtomically(path, std::string(100, 'x')); });
  }
  EXPECT_EQ(message, path + ": write error (File too large)");
  EXPECT_EQ(testing::ReadBytes(path), "old");
  EXPECT_EQ(dir.Entries(), std::vector<std::string>{"table.tsv"});

  // Renaming over a folder fails: the folder stays, the temporary goes.
  const std::string folder = dir / "sub";
  std::filesystem::create_directory(folder);
  message = ErrorOf([&] { WriteFileAtomically(folder, "x"); });
  EXPECT_EQ(message.rfind(folder + ": cannot rename ", 0), 0u) << message;
  EXPECT_TRUE(std::filesystem::is_directory(folder));
  EXPECT_EQ(dir.Entries(), (std::vector<std::string>{"sub", "table.tsv"}));

  const std::string nowhere = dir / "none/x.json";
  EXPECT_EQ(ErrorOf([&] { WriteFileAtomically(nowhere, "x"); }),
            nowhere + ": cannot create a temporary file in " + dir / "none" +
                " (No such file or directory)");
}

}  // namespace
}  // namespace boldsum
