// Exposes the JSON sidecar reader (src/config/json_members.h) to the reference script
// tests/reference/test_config_json.py. For each file named on the command line, prints
//   member <JSON-quoted name> <line> <column> <is_number 0|1> <number as JsonNumber>
// per top-level member, tab-separated, or one line
//   error <line> <column> <message>
// then "end".
#include <iostream>

#include "boldsum/io.h"
#include "config/json_members.h"

int main(int argc, char** argv) {
  for (int i = 1; i < argc; ++i) {
    try {
      for (const boldsum::config::JsonMember& member : boldsum::config::ReadJsonMembers(argv[i])) {
        std::cout << "member\t" << boldsum::JsonQuote(member.name) << "\t" << member.where.line
                  << "\t" << member.where.column << "\t" << (member.is_number ? 1 : 0) << "\t"
                  << boldsum::JsonNumber(member.number) << "\n";
      }
    } catch (const boldsum::Error& error) {
      std::cout << "error\t" << error.where().line << "\t" << error.where().column << "\t"
                << error.what() << "\n";
    }
    std::cout << "end\n";
  }
  return 0;
}
