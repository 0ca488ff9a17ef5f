// TSV tables: ReadTable, ParseNumber, ReadNumericTable (declared in boldsum/io.h).
//
// Format: UTF-8 text, cells separated by single tabs, one header line then one line per
// row; a trailing "\r" (CRLF files) is dropped; empty lines are allowed only at the end of
// the file; a UTF-8 byte-order mark before the header is dropped. Cells are kept verbatim (no
// trimming), so that CellLocation can give the character column of a cell in the file.
#include <charconv>
#include <cmath>
#include <fstream>
#include <limits>
#include <sstream>
#include <string>
#include <system_error>
#include <vector>

#include "boldsum/io.h"

namespace boldsum {
namespace {

std::vector<std::string> SplitTabs(const std::string& line) {
  std::vector<std::string> cells;
  size_t start = 0;
  while (true) {
    const size_t tab = line.find('\t', start);
    if (tab == std::string::npos) {
      cells.push_back(line.substr(start));
      return cells;
    }
    cells.push_back(line.substr(start, tab - start));
    start = tab + 1;
  }
}

}  // namespace

int Table::ColumnIndex(const std::string& name) const {
  for (size_t i = 0; i < header.size(); ++i) {
    if (header[i] == name) return static_cast<int>(i);
  }
  return -1;
}

SourceLocation Table::CellLocation(int row, int column) const {
  SourceLocation where{path, row + 2, 0};
  if (row < 0 || row >= static_cast<int>(rows.size())) return where;
  const std::vector<std::string>& cells = rows[static_cast<size_t>(row)];
  if (column < 0 || column >= static_cast<int>(cells.size())) return where;
  int offset = 1;
  for (int c = 0; c < column; ++c) {
    offset += static_cast<int>(cells[static_cast<size_t>(c)].size()) + 1;
  }
  where.column = offset;
  return where;
}

Table ReadTable(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  if (!in) throw Error(SourceLocation{path, 0, 0}, "cannot open the table for reading");
  Table table;
  table.path = path;
  std::vector<std::string> lines;
  std::string line;
  while (std::getline(in, line)) {
    if (!line.empty() && line.back() == '\r') line.pop_back();
    if (lines.empty() && line.rfind("\xEF\xBB\xBF", 0) == 0) line.erase(0, 3);  // UTF-8 BOM
    lines.push_back(line);
  }
  if (in.bad()) throw Error(SourceLocation{path, 0, 0}, "read error");
  while (!lines.empty() && lines.back().empty()) lines.pop_back();
  if (lines.empty()) {
    throw Error(SourceLocation{path, 0, 0}, "empty file; expected a header line of column names");
  }
  table.header = SplitTabs(lines[0]);
  for (size_t c = 0; c < table.header.size(); ++c) {
    const std::string& name = table.header[c];
    if (name.empty()) {
      throw Error(SourceLocation{path, 1, 0},
                  "header column " + std::to_string(c + 1) + " has an empty name");
    }
    for (size_t earlier = 0; earlier < c; ++earlier) {
      if (table.header[earlier] == name) {
        throw Error(SourceLocation{path, 1, 0},
                    "column name '" + name + "' appears twice (columns " +
                        std::to_string(earlier + 1) + " and " + std::to_string(c + 1) + ")");
      }
    }
  }
  for (size_t i = 1; i < lines.size(); ++i) {
    std::vector<std::string> cells = SplitTabs(lines[i]);
    if (cells.size() != table.header.size()) {
      throw Error(SourceLocation{path, static_cast<int>(i + 1), 0},
                  "row has " + std::to_string(cells.size()) +
                      " tab-separated cells but the header has " +
                      std::to_string(table.header.size()) + " columns");
    }
    table.rows.push_back(std::move(cells));
  }
  return table;
}

bool ParseNumber(const std::string& cell, double* value) {
  const char* first = cell.data();
  const char* last = cell.data() + cell.size();
  // from_chars takes no leading '+'; accept one when a digit or point follows.
  if (first != last && *first == '+' && last - first > 1 && first[1] != '-' && first[1] != '+') {
    ++first;
  }
  if (first == last) return false;
  double parsed = 0.0;
  const std::from_chars_result result = std::from_chars(first, last, parsed);
  if (result.ec != std::errc() || result.ptr != last || !std::isfinite(parsed)) return false;
  *value = parsed;
  return true;
}

NumericTable ReadNumericTable(const std::string& path, bool allow_na) {
  const Table table = ReadTable(path);
  NumericTable numeric;
  numeric.path = path;
  numeric.names = table.header;
  const int n_rows = static_cast<int>(table.rows.size());
  const int n_cols = static_cast<int>(table.header.size());
  numeric.values.resize(n_rows, n_cols);
  for (int r = 0; r < n_rows; ++r) {
    for (int c = 0; c < n_cols; ++c) {
      const std::string& cell = table.rows[static_cast<size_t>(r)][static_cast<size_t>(c)];
      double value = 0.0;
      if (ParseNumber(cell, &value)) {
        numeric.values(r, c) = value;
      } else if (cell == "n/a" && allow_na) {
        numeric.values(r, c) = std::numeric_limits<double>::quiet_NaN();
        numeric.na_cells.emplace_back(r, c);
      } else if (cell == "n/a") {
        throw Error(table.CellLocation(r, c),
                    "column '" + table.header[static_cast<size_t>(c)] +
                        "': 'n/a' is not allowed in this table; every cell must be a number");
      } else {
        throw Error(table.CellLocation(r, c), "column '" + table.header[static_cast<size_t>(c)] +
                                                  "': expected a finite number, got '" + cell +
                                                  "'");
      }
    }
  }
  return numeric;
}

}  // namespace boldsum
