// The top-level members of a JSON object file (RFC 8259), as needed to read BIDS
// sidecars: the whole text is checked, nested values are skipped over.
#pragma once

#include <string>
#include <vector>

#include "boldsum/error.h"

namespace boldsum::config {

struct JsonMember {
  std::string name;  // escapes decoded
  std::string text;  // the value as written ("2.0", "\"ms\"", "[0, 1]")
  bool is_number = false;
  double number = 0.0;   // when is_number
  SourceLocation where;  // the value's first character, 1-based line and column
};

// Members in file order (repeats kept). Throws Error at the offending file:line:column
// when the file cannot be read, is not valid JSON, or its top value is not an object.
// Columns count bytes; a UTF-8 byte-order mark is skipped.
std::vector<JsonMember> ReadJsonMembers(const std::string& path);

}  // namespace boldsum::config
