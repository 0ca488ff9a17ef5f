// TSV tables: ReadTable structure errors, strict ParseNumber, ReadNumericTable and n/a.
// Self-contained: writes its own files under BOLDSUM_TMP (or the GoogleTest temp folder).
#include <gtest/gtest.h>

#include <cmath>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <string>

#include "boldsum/io.h"

namespace boldsum {
namespace {

std::string WriteTableFile(const std::string& name, const std::string& contents) {
  const char* base = std::getenv("BOLDSUM_TMP");
  const std::filesystem::path dir =
      std::filesystem::path(base ? base : ::testing::TempDir()) / "table_tests";
  std::filesystem::create_directories(dir);
  const std::string path = (dir / name).string();
  std::ofstream(path, std::ios::binary) << contents;
  return path;
}

// The message ReadTable/ReadNumericTable throw for `contents`, or "" if none.
template <typename Reader>
std::string ThrownMessage(Reader read, const std::string& path) {
  try {
    read(path);
  } catch (const Error& error) {
    return error.what();
  }
  return "";
}

TEST(ReadTable, ReadsHeaderRowsAndCellLocations) {
  // A byte-order mark, CRLF line ends and trailing empty lines, as spreadsheets write.
  const std::string path = WriteTableFile("plain.tsv",
                                          "\xEF\xBB\xBFonset\tduration\ttrial_type\r\n"
                                          "1.5\t2\tmelody_known\r\n"
                                          "10\t0\tpress\r\n"
                                          "\n\n");
  const Table table = ReadTable(path);
  EXPECT_EQ(table.path, path);
  EXPECT_EQ(table.header, (std::vector<std::string>{"onset", "duration", "trial_type"}));
  ASSERT_EQ(table.rows.size(), 2u);
  EXPECT_EQ(table.rows[1], (std::vector<std::string>{"10", "0", "press"}));
  EXPECT_EQ(table.ColumnIndex("trial_type"), 2);
  EXPECT_EQ(table.ColumnIndex("amplitude"), -1);
  // Row 1 is line 3; "press" starts after "10\t0\t", at character 6.
  EXPECT_EQ(table.CellLocation(1, 2).ToString(), path + ":3:6");
  EXPECT_EQ(table.CellLocation(0, 0).ToString(), path + ":2:1");
}

TEST(ReadTable, RaggedRowIsAnErrorAtItsLine) {
  const std::string path = WriteTableFile("ragged.tsv", "a\tb\tc\n1\t2\t3\n4\t5\n6\t7\t8\n");
  EXPECT_EQ(ThrownMessage(ReadTable, path),
            path + ":3: row has 2 tab-separated cells but the header has 3 columns");
  const std::string wide = WriteTableFile("wide.tsv", "a\tb\n1\t2\t\n");
  EXPECT_EQ(ThrownMessage(ReadTable, wide),
            wide + ":2: row has 3 tab-separated cells but the header has 2 columns");
}

TEST(ReadTable, BlankLineInsideTheTableIsARaggedRow) {
  const std::string path = WriteTableFile("blank.tsv", "a\tb\n1\t2\n\n3\t4\n");
  EXPECT_EQ(ThrownMessage(ReadTable, path),
            path + ":3: row has 1 tab-separated cells but the header has 2 columns");
}

TEST(ReadTable, HeaderProblems) {
  const std::string empty = WriteTableFile("empty.tsv", "\n");
  EXPECT_EQ(ThrownMessage(ReadTable, empty),
            empty + ": empty file; expected a header line of column names");
  const std::string twice = WriteTableFile("twice.tsv", "a\tb\ta\n1\t2\t3\n");
  EXPECT_EQ(ThrownMessage(ReadTable, twice),
            twice + ":1: column name 'a' appears twice (columns 1 and 3)");
  const std::string unnamed = WriteTableFile("unnamed.tsv", "a\t\n1\t2\n");
  EXPECT_EQ(ThrownMessage(ReadTable, unnamed), unnamed + ":1: header column 2 has an empty name");
  const std::string missing = WriteTableFile("x", "") + "_absent.tsv";
  EXPECT_EQ(ThrownMessage(ReadTable, missing), missing + ": cannot open the table for reading");
}

TEST(ParseNumber, AcceptsOnlyWholeFiniteDecimalNumbers) {
  double value = -7.0;
  for (const char* bad : {"1.5x", "", "nan", "NaN", "inf", "-inf", "Infinity", " 1", "1 ", "0x10",
                          "1,5", "+", "-", "e3", "1e", "1e400", "n/a", "--1"}) {
    EXPECT_FALSE(ParseNumber(bad, &value)) << "'" << bad << "'";
    EXPECT_EQ(value, -7.0) << "a rejected cell must leave the output untouched";
  }
  // Expected values are the decimal literals themselves (the C++ compiler's rounding).
  const std::pair<const char*, double> good[] = {
      {"1e-3", 1e-3}, {"0", 0.0},  {"-2.5", -2.5}, {"+4", 4.0},
      {".5", 0.5},    {"5.", 5.0}, {"1E6", 1e6},   {"123456789012345678", 123456789012345678.0}};
  for (const auto& [text, expected] : good) {
    ASSERT_TRUE(ParseNumber(text, &value)) << text;
    EXPECT_EQ(value, expected) << text;
  }
}

TEST(ReadNumericTable, ValuesAndNaCells) {
  const std::string path = WriteTableFile("confounds.tsv",
                                          "shift_x\tdisplacement\n"
                                          "0.1\tn/a\n"
                                          "-0.2\t0.5\n"
                                          "n/a\t1e-3\n");
  const NumericTable table = ReadNumericTable(path, /*allow_na=*/true);
  EXPECT_EQ(table.names, (std::vector<std::string>{"shift_x", "displacement"}));
  ASSERT_EQ(table.values.rows(), 3);
  ASSERT_EQ(table.values.cols(), 2);
  EXPECT_EQ(table.values(0, 0), 0.1);
  EXPECT_EQ(table.values(1, 0), -0.2);
  EXPECT_EQ(table.values(2, 1), 1e-3);
  EXPECT_TRUE(std::isnan(table.values(0, 1)));
  EXPECT_TRUE(std::isnan(table.values(2, 0)));
  EXPECT_EQ(table.na_cells, (std::vector<std::pair<int, int>>{{0, 1}, {2, 0}}));

  auto strict = [](const std::string& p) { return ReadNumericTable(p, /*allow_na=*/false); };
  EXPECT_EQ(ThrownMessage(strict, path),
            path +
                ":2:5: column 'displacement': 'n/a' is not allowed in this table; every cell "
                "must be a number");
}

TEST(ReadNumericTable, NonNumericCellIsAnErrorAtItsCell) {
  const std::string path = WriteTableFile("roi.tsv", "left\tright\n1.0\t2.0\n3.0\t4.0x\n");
  auto lenient = [](const std::string& p) { return ReadNumericTable(p, /*allow_na=*/true); };
  EXPECT_EQ(ThrownMessage(lenient, path),
            path + ":3:5: column 'right': expected a finite number, got '4.0x'");
  const std::string header_only = WriteTableFile("header_only.tsv", "left\tright\n");
  const NumericTable empty = ReadNumericTable(header_only, false);
  EXPECT_EQ(empty.values.rows(), 0);
  EXPECT_EQ(empty.values.cols(), 2);
}

}  // namespace
}  // namespace boldsum
