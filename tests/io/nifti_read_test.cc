// Reading NIfTI-1/-2 files made byte by byte from the standards' header layouts.
// Expected values follow the NIfTI-1 standard (nifti1.h): value = scl_slope * raw +
// scl_inter unless scl_slope is 0; pixdim[4] in the time unit of xyzt_units.
// tests/reference/test_nifti_io.py checks the same against nibabel.
#include <gtest/gtest.h>

#include <cmath>
#include <limits>

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

// Every row of the stream, all voxels, in order.
std::vector<float> StreamAll(const std::string& path, int block) {
  const ImageGeometry g = ReadImageGeometry(path);
  std::vector<int64_t> voxels(static_cast<size_t>(g.n_voxels()));
  for (size_t i = 0; i < voxels.size(); ++i) voxels[i] = static_cast<int64_t>(i);
  VolumeStream stream(path, voxels, block);
  std::vector<float> values;
  Eigen::MatrixXf m;
  while (stream.Next(&m)) {
    for (Eigen::Index t = 0; t < m.rows(); ++t) {
      for (Eigen::Index j = 0; j < m.cols(); ++j) values.push_back(m(t, j));
    }
  }
  return values;
}

template <typename T>
void CheckDatatype(int datatype, int bitpix, const std::vector<T>& raw) {
  ScratchDir dir;
  for (int version : {1, 2}) {
    for (const char* ext : {".nii", ".nii.gz"}) {
      for (bool scaled : {false, true}) {
        HeaderSpec spec;
        spec.version = version;
        spec.datatype = datatype;
        spec.bitpix = bitpix;
        spec.dims = {3, 2, 1, static_cast<int64_t>(raw.size() / 6)};
        if (scaled) {
          spec.slope = 2.5;
          spec.inter = -1.25;
        }
        const std::string path = dir / ("v" + std::to_string(version) + ext);
        WriteBytes(path, HeaderBytes(spec) + RawBytes(raw));
        std::vector<float> expected;
        for (T r : raw) {
          expected.push_back(scaled ? static_cast<float>(2.5 * static_cast<double>(r) - 1.25)
                                    : static_cast<float>(r));
        }
        SCOPED_TRACE(path + (scaled ? " scaled" : ""));
        EXPECT_EQ(StreamAll(path, 2), expected);
        ImageGeometry g;
        const std::vector<float> first = ReadVolume(path, &g);
        EXPECT_EQ(first, std::vector<float>(expected.begin(), expected.begin() + 6));
        EXPECT_EQ(g.nifti_version, version);
        EXPECT_EQ(g.n_volumes, static_cast<int>(raw.size() / 6));
      }
    }
  }
}

TEST(NiftiRead, Uint8) {
  CheckDatatype<uint8_t>(DT_UINT8, 8, {0, 1, 2, 127, 128, 255, 7, 9, 11, 13, 200, 3});
}

TEST(NiftiRead, Int16) {
  CheckDatatype<int16_t>(DT_INT16, 16, {-32768, -1, 0, 1, 32767, 12345, 5, -5, 7, 9, 11, -300});
}

TEST(NiftiRead, Int32) {
  // 2^31 - 1 and 16777217 are not floats: they round to the nearest float.
  CheckDatatype<int32_t>(DT_INT32, 32, {std::numeric_limits<int32_t>::min(), -1, 0, 16777217,
                                        std::numeric_limits<int32_t>::max(), 42});
}

TEST(NiftiRead, Float32) {
  CheckDatatype<float>(DT_FLOAT32, 32, {0.0f, -0.0f, 1.5f, -2.25f, 1e-40f, 3.4e38f,
                                        std::numeric_limits<float>::infinity(), 1e-3f, 7, 8,
                                        9, 10});
}

TEST(NiftiRead, Float64) {
  CheckDatatype<double>(DT_FLOAT64, 64, {0.1, -1e300, 1e-320, 3.0000001, 1.0 / 3, 6});
}

TEST(NiftiRead, NanSurvives) {
  ScratchDir dir;
  HeaderSpec spec;
  spec.dims = {2, 1, 1};
  const float nan = std::numeric_limits<float>::quiet_NaN();
  WriteBytes(dir / "n.nii", HeaderBytes(spec) + RawBytes(std::vector<float>{nan, 1}));
  const std::vector<float> v = ReadVolume(dir / "n.nii", nullptr);
  EXPECT_TRUE(std::isnan(v[0]));
  EXPECT_EQ(v[1], 1.0f);
}

TEST(NiftiRead, SlopeZeroMeansNoScalingEvenWithAnIntercept) {
  ScratchDir dir;
  HeaderSpec spec;
  spec.datatype = DT_INT16;
  spec.bitpix = 16;
  spec.dims = {3, 1, 1};
  spec.slope = 0;
  spec.inter = 100;  // ignored: the standard disables scaling when scl_slope is 0
  WriteBytes(dir / "s.nii", HeaderBytes(spec) + RawBytes(std::vector<int16_t>{1, 2, 3}));
  EXPECT_EQ(ReadVolume(dir / "s.nii", nullptr), (std::vector<float>{1, 2, 3}));
}

TEST(NiftiRead, BigEndianFile) {
  ScratchDir dir;
  HeaderSpec spec;
  spec.datatype = DT_INT16;
  spec.bitpix = 16;
  spec.dims = {2, 2, 1, 2};
  spec.slope = 0.5;
  spec.big_endian = true;
  const std::vector<int16_t> raw = {1, -2, 300, -32768, 5, 6, 7, 8};
  WriteBytes(dir / "b.nii.gz", HeaderBytes(spec) + RawBytes(raw, true));
  EXPECT_EQ(StreamAll(dir / "b.nii.gz", 1),
            (std::vector<float>{0.5f, -1, 150, -16384, 2.5f, 3, 3.5f, 4}));
}

TEST(NiftiRead, ExtensionsAreSkipped) {
  ScratchDir dir;
  HeaderSpec spec;
  spec.dims = {2, 1, 1};
  spec.extension = std::vector<char>(37, 'x');
  WriteBytes(dir / "e.nii.gz", HeaderBytes(spec) + RawBytes(std::vector<float>{4, 5}));
  EXPECT_EQ(ReadVolume(dir / "e.nii.gz", nullptr), (std::vector<float>{4, 5}));
}

TEST(NiftiRead, GeometryFromTheHeader) {
  ScratchDir dir;
  HeaderSpec spec;
  spec.version = 2;
  spec.dims = {2, 3, 4, 5};
  spec.pixdim[0] = -1;  // qfac
  spec.pixdim[4] = 2500;
  spec.xyzt_units = NIFTI_UNITS_MM | NIFTI_UNITS_MSEC;
  spec.qform_code = 1;
  spec.sform_code = 4;
  const double quatern[6] = {0.1, -0.2, 0.3, -90, 126.5, -72};
  std::copy(quatern, quatern + 6, spec.quatern);
  const double srow[3][4] = {{-2, 0.1, 0, 90}, {0.05, 2.5, 0, -126}, {0, 0, 3, -72}};
  std::memcpy(spec.srow, srow, sizeof srow);
  WriteBytes(dir / "g.nii", HeaderBytes(spec) + std::string(2 * 3 * 4 * 5 * 4, '\0'));
  const ImageGeometry g = ReadImageGeometry(dir / "g.nii");
  EXPECT_EQ(g.nifti_version, 2);
  EXPECT_EQ(g.dims, (std::array<int, 3>{2, 3, 4}));
  EXPECT_EQ(g.n_volumes, 5);
  EXPECT_EQ(g.voxel_mm, (std::array<double, 3>{2.0, 2.5, 3.0}));
  EXPECT_EQ(g.tr_s, 2.5);
  EXPECT_EQ(g.qform_code, 1);
  EXPECT_EQ(g.sform_code, 4);
  EXPECT_EQ(g.quatern_b, 0.1);
  EXPECT_EQ(g.quatern_c, -0.2);
  EXPECT_EQ(g.quatern_d, 0.3);
  EXPECT_EQ(g.qoffset_x, -90);
  EXPECT_EQ(g.qoffset_y, 126.5);
  EXPECT_EQ(g.qoffset_z, -72);
  EXPECT_EQ(g.qfac, -1);
  for (int r = 0; r < 3; ++r) {
    for (int c = 0; c < 4; ++c) EXPECT_EQ(g.srow[r][c], srow[r][c]) << r << "," << c;
  }
}

TEST(NiftiRead, TimeUnits) {
  ScratchDir dir;
  struct Case {
    int units;
    double pixdim4, tr_s;
  } cases[] = {{NIFTI_UNITS_SEC, 2, 2},
               {NIFTI_UNITS_MSEC, 800, 0.8},
               {NIFTI_UNITS_USEC, 1.5e6, 1.5},
               {NIFTI_UNITS_UNKNOWN, 3, 3},  // unknown unit: taken as seconds
               {NIFTI_UNITS_HZ, 4, 4}};      // not a time unit: taken as seconds
  for (const Case& c : cases) {
    HeaderSpec spec;
    spec.dims = {1, 1, 1, 2};
    spec.pixdim[4] = c.pixdim4;
    spec.xyzt_units = NIFTI_UNITS_MM | c.units;
    WriteBytes(dir / "t.nii", HeaderBytes(spec) + std::string(8, '\0'));
    EXPECT_NEAR(ReadImageGeometry(dir / "t.nii").tr_s, c.tr_s, 1e-7 * c.tr_s) << c.units;
  }
}

TEST(NiftiRead, ThreeDImageHasOneVolumeAndNoTr) {
  ScratchDir dir;
  HeaderSpec spec;
  spec.pixdim[4] = 2;
  WriteBytes(dir / "3d.nii", HeaderBytes(spec) + std::string(2 * 3 * 4 * 4, '\0'));
  const ImageGeometry g = ReadImageGeometry(dir / "3d.nii");
  EXPECT_EQ(g.n_volumes, 1);
  EXPECT_EQ(g.tr_s, 0.0);
  EXPECT_EQ(g.n_voxels(), 24);
}

TEST(NiftiRead, UnsupportedDatatypesAreNamed) {
  ScratchDir dir;
  struct Case {
    int code, bitpix;
    const char* name;
  } cases[] = {{DT_INT8, 8, "int8"},         {DT_UINT16, 16, "uint16"},
               {DT_COMPLEX64, 64, "complex64"}, {DT_RGB24, 24, "rgb24"},
               {DT_INT64, 64, "int64"},       {DT_UINT32, 32, "uint32"}};
  for (const Case& c : cases) {
    HeaderSpec spec;
    spec.datatype = c.code;
    spec.bitpix = c.bitpix;
    const std::string path = dir / "d.nii";
    WriteBytes(path, HeaderBytes(spec) + std::string(24 * 8, '\0'));
    EXPECT_EQ(ErrorOf([&] { ReadImageGeometry(path); }),
              path + ": datatype " + c.name +
                  " is not supported (expected uint8, int16, int32, float32 or float64)");
  }
}

TEST(NiftiRead, NotNifti) {
  ScratchDir dir;
  const std::string text = dir / "notes.nii";
  WriteBytes(text, std::string(400, 'x'));
  EXPECT_EQ(ErrorOf([&] { ReadImageGeometry(text); }), text + ": not a NIfTI file");
  const std::string empty = dir / "empty.nii.gz";
  WriteBytes(empty, "");
  EXPECT_EQ(ErrorOf([&] { ReadImageGeometry(empty); }), empty + ": not a NIfTI file");
  const std::string missing = dir / "missing.nii.gz";
  EXPECT_EQ(ErrorOf([&] { ReadImageGeometry(missing); }),
            missing + ": cannot open (No such file or directory)");
}

TEST(NiftiRead, FiveDimensionsAreRefused) {
  ScratchDir dir;
  HeaderSpec spec;
  spec.dims = {2, 2, 2, 1, 3};
  const std::string path = dir / "5d.nii";
  WriteBytes(path, HeaderBytes(spec) + std::string(24 * 4, '\0'));
  EXPECT_EQ(ErrorOf([&] { ReadImageGeometry(path); }),
            path + ": has 5 dimensions (dim[5] = 3); expected a 3D or 4D image");
}

TEST(NiftiRead, TruncatedVolume) {
  ScratchDir dir;
  HeaderSpec spec;
  spec.dims = {2, 3, 4};
  for (const char* name : {"t.nii", "t.nii.gz"}) {
    const std::string path = dir / name;
    WriteBytes(path, HeaderBytes(spec) + std::string(23 * 4, '\0'));
    EXPECT_EQ(ErrorOf([&] { ReadVolume(path, nullptr); }),
              path + ": file ends after volume 0 of 1");
  }
}

}  // namespace
}  // namespace boldsum
