#include <gtest/gtest.h>

#include <cstdlib>
#include <sstream>

#include "boldsum/design.h"
#include "design_test_util.h"

namespace boldsum {
namespace {

using testing::MelodyModel;
using testing::MelodyRun;

int Count(const std::string& text, const std::string& what) {
  int count = 0;
  for (size_t at = text.find(what); at != std::string::npos; at = text.find(what, at + 1)) ++count;
  return count;
}

TEST(DesignToTsv, HeaderThenRowsThatReadBackExactly) {
  ModelSpec model = MelodyModel();
  model.hrf.derivatives = HrfDerivatives::kTimeDispersion;
  const DesignMatrix design = BuildDesign(model, MelodyRun(), ConfoundTable{}, 77, nullptr);
  std::istringstream lines(DesignToTsv(design));
  std::string line;
  std::getline(lines, line);
  EXPECT_EQ(line,
            "melody\tmelody_dt\tmelody_disp\tsilence\tsilence_dt\tsilence_disp\tdrift_cos1\t"
            "drift_cos2\tintercept");
  int row = 0;
  while (std::getline(lines, line)) {
    std::istringstream cells(line);
    std::string cell;
    int column = 0;
    while (std::getline(cells, cell, '\t')) {
      // 17 significant digits round-trip a double exactly (IEEE 754-2008, 5.12.2).
      EXPECT_EQ(std::strtod(cell.c_str(), nullptr), design.x(row, column)) << row << "," << column;
      ++column;
    }
    EXPECT_EQ(column, design.n_columns());
    ++row;
  }
  EXPECT_EQ(row, 77);
}

TEST(DesignToSvg, SelfContainedPictureWithLabelsAndTicks) {
  DesignMatrix design;
  design.x.resize(3, 3);
  design.x << 0, 5, 1, 1, 7, 1, 2, 9, 1;
  design.columns = {{"a<b", ColumnKind::kConfound, ""},
                    {"tone&pitch", ColumnKind::kConfound, ""},
                    {"intercept", ColumnKind::kIntercept, ""}};
  const std::string svg = DesignToSvg(design, "run \"1\"");
  EXPECT_EQ(svg.rfind("<svg xmlns=\"http://www.w3.org/2000/svg\"", 0), 0u);
  EXPECT_EQ(svg.substr(svg.size() - 7), "</svg>\n");
  EXPECT_NE(svg.find(">a&lt;b</text>"), std::string::npos);
  EXPECT_NE(svg.find(">tone&amp;pitch</text>"), std::string::npos);
  EXPECT_NE(svg.find("run &quot;1&quot;"), std::string::npos);
  EXPECT_EQ(svg.find("href"), std::string::npos);  // nothing external
  // Each column scaled to its own range: rows 0,1,2 are black, mid-grey, white in the
  // first two columns; the constant intercept is one white band.
  EXPECT_EQ(Count(svg, "fill=\"#000000\""), 2);
  EXPECT_EQ(Count(svg, "fill=\"#808080\""), 2);
  EXPECT_EQ(Count(svg, "fill=\"#ffffff\""), 3);
  EXPECT_EQ(Count(svg, "<rect x="), 2 * 3 + 1 + 1);  // cells, intercept band, frame
  EXPECT_EQ(Count(svg, ">0</text>"), 1);  // volume tick
}

TEST(DesignToSvg, LongRunsAreDrawnInAtMost400Bands) {
  ModelSpec model = MelodyModel();
  const DesignMatrix design = BuildDesign(model, MelodyRun(), ConfoundTable{}, 2000, nullptr);
  const std::string svg = DesignToSvg(design, "long run");
  EXPECT_LE(Count(svg, "<rect x="), design.n_columns() * 400 + 1);
  EXPECT_LT(svg.size(), 2'000'000u);
}

}  // namespace
}  // namespace boldsum
