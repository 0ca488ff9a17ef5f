// VolumeStream: block boundaries, voxel subsets, errors raised on the reader thread.
// Expected values are the raw float32 values written byte by byte (NIfTI-1 layout).
#include <gtest/gtest.h>
#include <rapidcheck/gtest.h>
#include <zlib.h>

#include <fstream>
#include <numeric>

#include "boldsum/io.h"
#include "nifti_files.h"

namespace boldsum {
namespace {

using testing::ErrorOf;
using testing::HeaderBytes;
using testing::HeaderSpec;
using testing::RawBytes;
using testing::ScratchDir;
using testing::WriteBytes;

// value(t, i) = 1000 * t + i, exact in float for the sizes used here.
std::vector<float> Series(int64_t n_voxels, int n_volumes) {
  std::vector<float> values;
  for (int t = 0; t < n_volumes; ++t) {
    for (int64_t i = 0; i < n_voxels; ++i) values.push_back(static_cast<float>(1000 * t + i));
  }
  return values;
}

std::string Write4d(const ScratchDir& dir, const std::string& name,
                    const std::vector<int64_t>& dims) {
  HeaderSpec spec;
  spec.dims = dims;
  const std::string path = dir / name;
  WriteBytes(path, HeaderBytes(spec) + RawBytes(Series(dims[0] * dims[1] * dims[2], int(dims[3]))));
  return path;
}

// The blocks' row counts and the volumes stacked in order.
struct Streamed {
  std::vector<int> rows;
  Eigen::MatrixXf all;
};

Streamed StreamAll(const std::string& path, const std::vector<int64_t>& voxels, int block) {
  VolumeStream stream(path, voxels, block);
  Streamed out;
  out.all.resize(0, static_cast<Eigen::Index>(voxels.size()));
  Eigen::MatrixXf m;
  while (stream.Next(&m)) {
    EXPECT_EQ(m.cols(), static_cast<Eigen::Index>(voxels.size()));
    out.rows.push_back(static_cast<int>(m.rows()));
    Eigen::MatrixXf grown(out.all.rows() + m.rows(), m.cols());
    grown << out.all, m;
    out.all = grown;
  }
  return out;
}

Eigen::MatrixXf Expected(const std::vector<int64_t>& voxels, int n_volumes) {
  Eigen::MatrixXf m(n_volumes, static_cast<Eigen::Index>(voxels.size()));
  for (int t = 0; t < n_volumes; ++t) {
    for (size_t j = 0; j < voxels.size(); ++j) m(t, Eigen::Index(j)) = float(1000 * t + voxels[j]);
  }
  return m;
}

TEST(VolumeStream, BlockBoundaries) {
  ScratchDir dir;
  for (const char* name : {"s.nii", "s.nii.gz"}) {
    const std::string path = Write4d(dir, name, {3, 2, 2, 7});
    std::vector<int64_t> all(12);
    std::iota(all.begin(), all.end(), 0);
    struct Case {
      int block;
      std::vector<int> rows;
    } cases[] = {
        {1, {1, 1, 1, 1, 1, 1, 1}}, {2, {2, 2, 2, 1}}, {3, {3, 3, 1}}, {7, {7}}, {10, {7}}};
    for (const Case& c : cases) {
      SCOPED_TRACE(std::string(name) + " block " + std::to_string(c.block));
      const Streamed s = StreamAll(path, all, c.block);
      EXPECT_EQ(s.rows, c.rows);
      EXPECT_EQ(s.all, Expected(all, 7));
    }
  }
}

TEST(VolumeStream, VoxelSubsets) {
  ScratchDir dir;
  const std::string path = Write4d(dir, "s.nii.gz", {4, 3, 2, 5});
  for (const std::vector<int64_t>& voxels :
       {std::vector<int64_t>{0}, std::vector<int64_t>{23}, std::vector<int64_t>{1, 5, 6, 22},
        std::vector<int64_t>{}}) {
    const Streamed s = StreamAll(path, voxels, 2);
    EXPECT_EQ(s.rows, (std::vector<int>{2, 2, 1}));
    EXPECT_EQ(s.all, Expected(voxels, 5));
  }
}

TEST(VolumeStream, EndLeavesTheBlockUntouched) {
  ScratchDir dir;
  const std::string path = Write4d(dir, "s.nii", {2, 1, 1, 3});
  VolumeStream stream(path, {0, 1}, 3);
  EXPECT_EQ(stream.geometry().n_volumes, 3);
  Eigen::MatrixXf m;
  ASSERT_TRUE(stream.Next(&m));
  const Eigen::MatrixXf last = m;
  EXPECT_FALSE(stream.Next(&m));
  EXPECT_FALSE(stream.Next(&m));
  EXPECT_EQ(m, last);
}

// The reader's grid sums equal the sums of every voxel streamed in full, for any voxel
// subset handed out, with scl_slope/scl_inter applied as Next() applies them.
TEST(VolumeStream, GridSumsMatchTheStreamedVolumes) {
  ScratchDir dir;
  for (const char* name : {"g.nii", "g.nii.gz"}) {
    SCOPED_TRACE(name);
    const std::string path = Write4d(dir, name, {3, 2, 2, 7});
    VolumeStream stream(path, {1, 4}, 3, /*sum_grid=*/true);
    Eigen::MatrixXf m;
    EXPECT_NE(ErrorOf([&] { stream.GridSums(); }).find("before every volume was read"),
              std::string::npos);
    while (stream.Next(&m)) {
    }
    const std::vector<double>& sums = stream.GridSums();
    ASSERT_EQ(sums.size(), 12u);
    for (int64_t i = 0; i < 12; ++i) {
      double expected = 0.0;  // sum over t of 1000 t + i
      for (int t = 0; t < 7; ++t) expected += 1000.0 * t + static_cast<double>(i);
      EXPECT_EQ(sums[static_cast<size_t>(i)], expected) << "voxel " << i;
    }
  }
  // int16 with scaling: the sums are of the scaled values.
  HeaderSpec spec;
  spec.dims = {2, 2, 1, 3};
  spec.datatype = DT_INT16;
  spec.bitpix = 16;
  spec.slope = 0.5;
  spec.inter = 10.0;
  std::vector<int16_t> raw;
  for (int t = 0; t < 3; ++t) {
    for (int i = 0; i < 4; ++i) raw.push_back(static_cast<int16_t>(100 * t - 7 * i));
  }
  const std::string scaled = dir / "scaled.nii.gz";
  WriteBytes(scaled, HeaderBytes(spec) + RawBytes(raw));
  const Streamed all = StreamAll(scaled, {0, 1, 2, 3}, 2);
  VolumeStream stream(scaled, {2}, 2, /*sum_grid=*/true);
  Eigen::MatrixXf m;
  while (stream.Next(&m)) {
  }
  for (int i = 0; i < 4; ++i) {
    EXPECT_DOUBLE_EQ(stream.GridSums()[static_cast<size_t>(i)], all.all.col(i).cast<double>().sum());
    EXPECT_DOUBLE_EQ(all.all(1, i), 0.5 * (100 - 7 * i) + 10.0);
  }
}

TEST(VolumeStream, GridSumsOnlyWhenAsked) {
  ScratchDir dir;
  const std::string path = Write4d(dir, "n.nii", {2, 1, 1, 2});
  VolumeStream stream(path, {0}, 2);
  Eigen::MatrixXf m;
  while (stream.Next(&m)) {
  }
  EXPECT_NE(ErrorOf([&] { stream.GridSums(); }).find("not asked to sum the grid"),
            std::string::npos);
}

TEST(VolumeStream, StoppingEarlyDoesNotHang) {
  ScratchDir dir;
  const std::string path = Write4d(dir, "s.nii.gz", {8, 8, 8, 40});
  VolumeStream stream(path, {0, 7, 511}, 1);
  Eigen::MatrixXf m;
  ASSERT_TRUE(stream.Next(&m));
  EXPECT_EQ(m(0, 2), 511.0f);
}  // the destructor stops the reader, which is blocked waiting for a free slot

TEST(VolumeStream, BadArguments) {
  ScratchDir dir;
  const std::string path = Write4d(dir, "s.nii", {2, 2, 1, 2});
  EXPECT_EQ(ErrorOf([&] { VolumeStream(path, {0}, 0); }),
            path + ": block_volumes = 0 (must be at least 1)");
  EXPECT_EQ(ErrorOf([&] {
              VolumeStream(path, {0, 4}, 1);
            }),
            path +
                ": voxel index 4 at position 1 is out of range or not increasing (the "
                "image has 4 voxels)");
  EXPECT_EQ(ErrorOf([&] {
              VolumeStream(path, {2, 2}, 1);
            }),
            path +
                ": voxel index 2 at position 1 is out of range or not increasing (the "
                "image has 4 voxels)");
}

// A file cut inside volume 4 of 6: blocks before it arrive, then the error does.
TEST(VolumeStream, TruncatedFileReachesNext) {
  ScratchDir dir;
  HeaderSpec spec;
  spec.dims = {5, 4, 3, 6};
  const std::string data = RawBytes(Series(60, 6));
  const std::string cut = HeaderBytes(spec) + data.substr(0, 60 * 4 * 3 + 100);
  const std::string gz = dir / "cut.nii.gz";
  WriteBytes(gz, cut);
  VolumeStream stream(gz, {0, 59}, 2);
  Eigen::MatrixXf m;
  ASSERT_TRUE(stream.Next(&m));
  EXPECT_EQ(m(1, 1), 1059.0f);
  EXPECT_EQ(ErrorOf([&] { stream.Next(&m); }), gz + ": file ends after volume 3 of 6");
  EXPECT_EQ(ErrorOf([&] { stream.Next(&m); }), gz + ": file ends after volume 3 of 6");

  // Uncompressed: the length is checked before any reading.
  const std::string plain = dir / "cut.nii";
  WriteBytes(plain, cut);
  EXPECT_EQ(ErrorOf([&] { VolumeStream(plain, {0}, 2); }),
            plain + ": file ends after volume 3 of 6");
}

// The gzip trailer (RFC 1952) holds a CRC-32 of the data: a changed byte there is caught
// before the last block is handed over (a large file, whose trailer nifticlib's header
// read does not reach), or when the header is read (a small one).
TEST(VolumeStream, CorruptGzipIsReported) {
  ScratchDir dir;
  for (int nx : {64, 4}) {
    HeaderSpec spec;
    spec.dims = {nx, 64, 16, 3};
    std::vector<float> noise(static_cast<size_t>(nx * 64 * 16 * 3));
    uint32_t state = 12345;
    for (float& v : noise) v = static_cast<float>(state = state * 1664525u + 1013904223u);
    const std::string path = dir / ("bad" + std::to_string(nx) + ".nii.gz");
    WriteBytes(path, HeaderBytes(spec) + RawBytes(noise));
    std::string bytes = testing::ReadBytes(path);
    bytes[bytes.size() - 6] ^= 0x55;  // inside the CRC-32
    std::ofstream(path, std::ios::binary) << bytes;
    EXPECT_EQ(ErrorOf([&] {
                VolumeStream stream(path, {0}, 3);
                Eigen::MatrixXf m;
                stream.Next(&m);
              }),
              path + ": corrupt gzip data (incorrect data check)");
  }
}

// gzip members with every optional header field of RFC 1952 section 2.3 (FEXTRA, FNAME,
// FCOMMENT, FHCRC), written by zlib's deflateSetHeader; and damaged trailers: a wrong
// length (ISIZE) and a file cut inside the trailer.
std::string GzipWithHeaderFields(const std::string& data) {
  z_stream zs{};
  EXPECT_EQ(deflateInit2(&zs, 6, Z_DEFLATED, 15 + 16, 8, Z_DEFAULT_STRATEGY), Z_OK);
  unsigned char extra[] = {'b', 's', 3, 0, 1, 2, 3};
  unsigned char name[] = "melody.nii";
  unsigned char comment[] = "a comment";
  gz_header header{};
  header.extra = extra;
  header.extra_len = sizeof extra;
  header.name = name;
  header.comment = comment;
  header.hcrc = 1;
  EXPECT_EQ(deflateSetHeader(&zs, &header), Z_OK);
  std::string out(deflateBound(&zs, data.size()) + 64, '\0');
  zs.next_in = reinterpret_cast<Bytef*>(const_cast<char*>(data.data()));
  zs.avail_in = static_cast<uInt>(data.size());
  zs.next_out = reinterpret_cast<Bytef*>(&out[0]);
  zs.avail_out = static_cast<uInt>(out.size());
  EXPECT_EQ(deflate(&zs, Z_FINISH), Z_STREAM_END);
  out.resize(zs.total_out);
  deflateEnd(&zs);
  return out;
}

TEST(VolumeStream, GzipHeaderFieldsAndTrailerChecks) {
  ScratchDir dir;
  HeaderSpec spec;
  spec.dims = {3, 2, 1, 5};
  const std::string data = HeaderBytes(spec) + RawBytes(Series(6, 5));
  const std::string member = GzipWithHeaderFields(data);
  ASSERT_EQ(static_cast<unsigned char>(member[3]), 0x1e);  // FHCRC|FEXTRA|FNAME|FCOMMENT
  const std::string path = dir / "fields.nii.gz";
  const auto put = [&](const std::string& bytes) {
    std::ofstream(path, std::ios::binary) << bytes;  // as they are, not compressed again
  };
  put(member);
  EXPECT_EQ(StreamAll(path, {0, 2, 5}, 2).all, Expected({0, 2, 5}, 5));
  // Two such members one after the other read as their concatenated data.
  const std::string half =
      GzipWithHeaderFields(data.substr(0, 200)) + GzipWithHeaderFields(data.substr(200));
  put(half);
  EXPECT_EQ(StreamAll(path, {0, 2, 5}, 2).all, Expected({0, 2, 5}, 5));

  std::string wrong_length = member;
  wrong_length[wrong_length.size() - 4] ^= 0x01;  // ISIZE, little-endian
  put(wrong_length);
  EXPECT_EQ(ErrorOf([&] { StreamAll(path, {0}, 5); }),
            path + ": corrupt gzip data (incorrect length check)");
  put(member.substr(0, member.size() - 3));
  EXPECT_EQ(ErrorOf([&] { StreamAll(path, {0}, 5); }),
            path + ": file ends before the end of its gzip stream (truncated)");
  std::string reserved = member;
  reserved[3] = static_cast<char>(reserved[3] | 0x20);
  put(reserved);
  EXPECT_NE(ErrorOf([&] { StreamAll(path, {0}, 5); }).find("unknown header flags set"),
            std::string::npos);
}

TEST(VolumeStream, ConcatenatedGzipMembers) {
  ScratchDir dir;
  HeaderSpec spec;
  spec.dims = {2, 2, 1, 4};
  const std::string bytes = HeaderBytes(spec) + RawBytes(Series(4, 4));
  const size_t half = bytes.size() / 2 + 3;
  WriteBytes(dir / "a.gz", bytes.substr(0, half));
  WriteBytes(dir / "b.gz", bytes.substr(half));
  const std::string path = dir / "two.nii.gz";
  std::ofstream(path, std::ios::binary)
      << testing::ReadBytes(dir / "a.gz") << testing::ReadBytes(dir / "b.gz");
  const Streamed s = StreamAll(path, {0, 1, 2, 3}, 3);
  EXPECT_EQ(s.all, Expected({0, 1, 2, 3}, 4));
}

// Property: any grid, length, block size and voxel subset gives the volumes in order.
RC_GTEST_PROP(VolumeStream, AnySubsetAndBlock, ()) {
  const int nx = *rc::gen::inRange(1, 6), ny = *rc::gen::inRange(1, 5);
  const int nz = *rc::gen::inRange(1, 4), nt = *rc::gen::inRange(1, 12);
  const int block = *rc::gen::inRange(1, 14);
  const bool gzip = *rc::gen::arbitrary<bool>();
  const int n = nx * ny * nz;
  const auto keep =
      *rc::gen::container<std::vector<bool>>(static_cast<size_t>(n), rc::gen::arbitrary<bool>());
  std::vector<int64_t> voxels;
  for (int i = 0; i < n; ++i) {
    if (keep[static_cast<size_t>(i)]) voxels.push_back(i);
  }
  ScratchDir dir;
  const std::string path = Write4d(dir, gzip ? "p.nii.gz" : "p.nii", {nx, ny, nz, nt});
  const Streamed s = StreamAll(path, voxels, block);
  RC_ASSERT(s.all == Expected(voxels, nt));
  RC_ASSERT(static_cast<int>(s.rows.size()) == (nt + block - 1) / block);
}

}  // namespace
}  // namespace boldsum
