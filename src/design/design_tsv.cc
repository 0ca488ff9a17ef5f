// DesignToTsv (declared in boldsum/design.h).
#include <cstdio>
#include <string>

#include "boldsum/design.h"

namespace boldsum {

std::string DesignToTsv(const DesignMatrix& design) {
  std::string text;
  for (int c = 0; c < design.n_columns(); ++c) {
    if (c > 0) text += '\t';
    text += design.columns[c].name;
  }
  text += '\n';
  char cell[32];
  for (int r = 0; r < design.n_volumes(); ++r) {
    for (int c = 0; c < design.n_columns(); ++c) {
      if (c > 0) text += '\t';
      // 17 significant digits round-trip every double exactly (IEEE 754-2008, 5.12.2).
      std::snprintf(cell, sizeof cell, "%.17g", design.x(r, c));
      text += cell;
    }
    text += '\n';
  }
  return text;
}

}  // namespace boldsum
