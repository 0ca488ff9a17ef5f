// Unit tests of the report's building blocks: base64 (RFC 4648 test vectors), the
// residual-diagnostics cache, axis order and slice orientation, the page frame.
#include <gtest/gtest.h>

#include <cmath>

#include "report/html_page.h"
#include "report/mosaic.h"
#include "report/png_image.h"
#include "report/residual_whiteness.h"
#include "report/world_space.h"

namespace boldsum {
namespace {

TEST(Base64, Rfc4648TestVectors) {
  // RFC 4648, section 10.
  EXPECT_EQ(Base64(""), "");
  EXPECT_EQ(Base64("f"), "Zg==");
  EXPECT_EQ(Base64("fo"), "Zm8=");
  EXPECT_EQ(Base64("foo"), "Zm9v");
  EXPECT_EQ(Base64("foob"), "Zm9vYg==");
  EXPECT_EQ(Base64("fooba"), "Zm9vYmE=");
  EXPECT_EQ(Base64("foobar"), "Zm9vYmFy");
  EXPECT_EQ(Base64(std::string("\xff\xfe\x00", 3)), "//4A");
}

TEST(Png, RejectsAnEmptyPicture) {
  EXPECT_THROW(EncodePng(RgbImage()), Error);
  const std::string png = EncodePng(RgbImage(3, 2, Rgb{1, 2, 3}));
  EXPECT_EQ(png.substr(0, 8), std::string("\x89PNG\r\n\x1a\n", 8));
}

ResidualDiagnostics SomeDiagnostics() {
  ResidualDiagnostics d;
  for (int r = 0; r < 2; ++r) {
    RunWhiteness run;
    run.q = {1.5f, std::nanf(""), 12.25f};
    run.p = {0.5f, std::nanf(""), 0.01f + r};
    run.tested = 2;
    run.flagged = 1;
    d.runs.push_back(run);
    d.tested += 2;
    d.flagged += 1;
  }
  d.mean_image = {0.0f, 1000.5f, -3.0f, 7.0f};
  return d;
}

TEST(ResidualCache, ReadsBackWhatWasWritten) {
  const ResidualDiagnostics d = SomeDiagnostics();
  const std::string bytes = SerializeResidualDiagnostics(d, "key-1");
  ResidualDiagnostics back;
  ASSERT_TRUE(ParseResidualDiagnostics(bytes, "key-1", &back));
  ASSERT_EQ(back.runs.size(), 2u);
  EXPECT_EQ(back.runs[1].q[2], 12.25f);
  EXPECT_TRUE(std::isnan(back.runs[0].p[1]));
  EXPECT_EQ(back.runs[1].p[2], 1.01f);
  EXPECT_EQ(back.mean_image, d.mean_image);
  EXPECT_EQ(back.tested, 4);
  EXPECT_EQ(back.flagged, 2);
  EXPECT_DOUBLE_EQ(back.share(), 0.5);
}

TEST(ResidualCache, AnotherKeyOrDamageIsAMiss) {
  const std::string bytes = SerializeResidualDiagnostics(SomeDiagnostics(), "key-1");
  ResidualDiagnostics back = SomeDiagnostics();
  back.tested = 99;
  EXPECT_FALSE(ParseResidualDiagnostics(bytes, "key-2", &back));
  EXPECT_FALSE(ParseResidualDiagnostics(bytes.substr(0, bytes.size() - 1), "key-1", &back));
  EXPECT_FALSE(ParseResidualDiagnostics(bytes + "x", "key-1", &back));
  EXPECT_FALSE(ParseResidualDiagnostics("", "key-1", &back));
  EXPECT_EQ(back.tested, 99);  // left alone
}

TEST(WorldSpace, DominantAxesOfAPermutedFlippedAffine) {
  // Voxel axis 0 runs along -y, axis 1 along +z, axis 2 along +x.
  const Affine a = {{{0, 0, 2, 0}, {-3, 0, 0, 0}, {0, 2.5, 0, 0}}};
  const AxisOrder order = DominantAxes(a);
  EXPECT_EQ(order.voxel_axis, (std::array<int, 3>{2, 0, 1}));
  EXPECT_EQ(order.sign, (std::array<int, 3>{1, -1, 1}));
}

// One marked voxel must appear where the world says: +x to the right, +y up.
TEST(Mosaic, ShowsWorldRightOnTheRightAndAnteriorUp) {
  for (double x_sign : {1.0, -1.0}) {
    ImageGeometry g;
    g.dims = {5, 4, 1};
    g.sform_code = 1;
    g.srow = {{{x_sign, 0, 0, 0}, {0, 1, 0, 0}, {0, 0, 1, 0}}};
    std::vector<unsigned char> extent(20, 1);
    std::vector<float> overlay(20, std::nanf(""));
    overlay[0 + 5 * 3] = 1.0f;  // i = 0, j = 3 (the largest y)
    SliceLayers layers;
    layers.overlay = &overlay;
    const MosaicPicture mosaic = DrawMosaic(g, extent, layers);
    ASSERT_EQ(mosaic.tile_labels.size(), 1u);
    const int scale = mosaic.tile_width / 5;
    ASSERT_EQ(mosaic.tile_height, 4 * scale);
    // i = 0 is world x = 0: the left column when x grows with i, the right one otherwise.
    const int column = x_sign > 0 ? 0 : 4;
    const Rgb marked = mosaic.image.at(column * scale, 0);  // top row: j = 3
    EXPECT_GT(marked.r, 100) << "x sign " << x_sign;
    EXPECT_LT(marked.b, 100) << "x sign " << x_sign;
    const Rgb other = mosaic.image.at((4 - column) * scale, 0);
    EXPECT_EQ(other.r + other.g + other.b, 0);
  }
}

TEST(HtmlPage, FramesEveryPageWithoutScriptsOrOutsideSources) {
  const std::string page = PageStart("Subject <s01>", "a & b") + PageEnd();
  EXPECT_NE(page.find("Content-Security-Policy\" content=\"default-src 'none'; img-src data:"),
            std::string::npos);
  EXPECT_NE(page.find("<h1>Subject &lt;s01&gt;</h1>"), std::string::npos);
  EXPECT_NE(page.find("a &amp; b"), std::string::npos);
  EXPECT_EQ(page.find("<script"), std::string::npos);
  EXPECT_EQ(page.find("http://"), std::string::npos);
}

}  // namespace
}  // namespace boldsum
