#include "config/json_members.h"

#include "boldsum/io.h"

namespace boldsum::config {
namespace {

constexpr int kMaxDepth = 512;  // nesting limit, against stack exhaustion

class JsonScanner {
 public:
  JsonScanner(std::string path, std::string text) : path_(std::move(path)), text_(std::move(text)) {
    if (text_.compare(0, 3, "\xEF\xBB\xBF") == 0) pos_ = 3;
  }

  std::vector<JsonMember> TopMembers() {
    SkipSpace();
    if (Peek() != '{') Fail("expected a JSON object ('{') at the top");
    ++pos_;
    std::vector<JsonMember> members;
    SkipSpace();
    if (Peek() == '}') {
      ++pos_;
    } else {
      while (true) {
        SkipSpace();
        if (Peek() != '"') Fail("expected a member name in double quotes");
        JsonMember member;
        member.name = String();
        SkipSpace();
        if (Peek() != ':') Fail("expected ':' after the member name");
        ++pos_;
        SkipSpace();
        member.where = Here();
        const std::size_t start = pos_;
        const bool number = Peek() == '-' || (Peek() >= '0' && Peek() <= '9');
        Value(1);
        member.text = text_.substr(start, pos_ - start);
        if (number) member.is_number = ParseNumber(member.text, &member.number);
        members.push_back(member);
        SkipSpace();
        if (Peek() == ',') {
          ++pos_;
          continue;
        }
        if (Peek() != '}') Fail("expected ',' or '}' after a member");
        ++pos_;
        break;
      }
    }
    SkipSpace();
    if (pos_ != text_.size()) Fail("unexpected text after the JSON object");
    return members;
  }

 private:
  char Peek() const { return pos_ < text_.size() ? text_[pos_] : '\0'; }

  SourceLocation Here() const {
    int line = 1;
    std::size_t line_start = 0;
    for (std::size_t i = 0; i < pos_ && i < text_.size(); ++i) {
      if (text_[i] == '\n') {
        ++line;
        line_start = i + 1;
      }
    }
    return SourceLocation{path_, line, static_cast<int>(pos_ - line_start) + 1};
  }

  [[noreturn]] void Fail(const std::string& message) const {
    const SourceLocation where = Here();
    throw Error(where, "invalid JSON: " + message + ", found " + Found());
  }

  // The character at pos_ for messages: quoted, whole when it is UTF-8 multi-byte, as
  // U+XXXX when it is a control character.
  std::string Found() const {
    if (pos_ >= text_.size()) return "the end";
    const auto byte = static_cast<unsigned char>(text_[pos_]);
    if (byte < 0x20 || byte == 0x7F) {
      static const char kHex[] = "0123456789ABCDEF";
      return std::string("U+00") + kHex[byte >> 4] + kHex[byte & 0xF];
    }
    std::size_t end = pos_ + 1;
    if (byte >= 0xC0) {
      while (end < text_.size() && end < pos_ + 4 &&
             (static_cast<unsigned char>(text_[end]) & 0xC0) == 0x80) {
        ++end;
      }
    }
    return "'" + text_.substr(pos_, end - pos_) + "'";
  }

  void SkipSpace() {
    while (pos_ < text_.size() && (text_[pos_] == ' ' || text_[pos_] == '\t' ||
                                   text_[pos_] == '\n' || text_[pos_] == '\r')) {
      ++pos_;
    }
  }

  void Literal(const char* word) {
    const std::string expected(word);
    if (text_.compare(pos_, expected.size(), expected) != 0) Fail("expected a JSON value");
    pos_ += expected.size();
  }

  static void AppendUtf8(unsigned code, std::string* out) {
    if (code < 0x80) {
      *out += static_cast<char>(code);
    } else if (code < 0x800) {
      *out += static_cast<char>(0xC0 | (code >> 6));
      *out += static_cast<char>(0x80 | (code & 0x3F));
    } else if (code < 0x10000) {
      *out += static_cast<char>(0xE0 | (code >> 12));
      *out += static_cast<char>(0x80 | ((code >> 6) & 0x3F));
      *out += static_cast<char>(0x80 | (code & 0x3F));
    } else {
      *out += static_cast<char>(0xF0 | (code >> 18));
      *out += static_cast<char>(0x80 | ((code >> 12) & 0x3F));
      *out += static_cast<char>(0x80 | ((code >> 6) & 0x3F));
      *out += static_cast<char>(0x80 | (code & 0x3F));
    }
  }

  unsigned Hex4() {
    unsigned code = 0;
    for (int i = 0; i < 4; ++i) {
      const char c = Peek();
      code <<= 4;
      if (c >= '0' && c <= '9') {
        code |= static_cast<unsigned>(c - '0');
      } else if (c >= 'a' && c <= 'f') {
        code |= static_cast<unsigned>(c - 'a' + 10);
      } else if (c >= 'A' && c <= 'F') {
        code |= static_cast<unsigned>(c - 'A' + 10);
      } else {
        Fail("expected four hex digits after \\u");
      }
      ++pos_;
    }
    return code;
  }

  // REQUIRES: Peek() == '"'. Returns the decoded string; lone surrogates become U+FFFD.
  std::string String() {
    ++pos_;
    std::string out;
    while (true) {
      if (pos_ >= text_.size()) Fail("unterminated string");
      const char c = text_[pos_];
      if (c == '"') {
        ++pos_;
        return out;
      }
      if (static_cast<unsigned char>(c) < 0x20) Fail("control character inside a string");
      if (c != '\\') {
        out += c;
        ++pos_;
        continue;
      }
      ++pos_;
      const char e = Peek();
      const std::string simple = "\"\\/bfnrt";
      const std::string meaning = "\"\\/\b\f\n\r\t";
      if (simple.find(e) != std::string::npos && e != '\0') {
        out += meaning[simple.find(e)];
        ++pos_;
      } else if (e == 'u') {
        ++pos_;
        unsigned code = Hex4();
        if (code >= 0xD800 && code < 0xDC00 && text_.compare(pos_, 2, "\\u") == 0) {
          const std::size_t back = pos_;
          pos_ += 2;
          const unsigned low = Hex4();
          if (low >= 0xDC00 && low < 0xE000) {
            code = 0x10000 + ((code - 0xD800) << 10) + (low - 0xDC00);
          } else {
            pos_ = back;
          }
        }
        if (code >= 0xD800 && code < 0xE000) code = 0xFFFD;
        AppendUtf8(code, &out);
      } else {
        Fail("unknown escape in a string");
      }
    }
  }

  void Number() {
    const std::size_t start = pos_;
    if (Peek() == '-') ++pos_;
    auto digits = [&] {
      const std::size_t first = pos_;
      while (Peek() >= '0' && Peek() <= '9') ++pos_;
      return pos_ - first;
    };
    const std::size_t whole = digits();
    if (whole == 0 || (whole > 1 && text_[pos_ - whole] == '0')) {
      pos_ = start;
      Fail("malformed number");
    }
    if (Peek() == '.') {
      ++pos_;
      if (digits() == 0) Fail("expected digits after '.'");
    }
    if (Peek() == 'e' || Peek() == 'E') {
      ++pos_;
      if (Peek() == '+' || Peek() == '-') ++pos_;
      if (digits() == 0) Fail("expected digits in the exponent");
    }
  }

  void Value(int depth) {
    if (depth > kMaxDepth) Fail("nesting deeper than " + std::to_string(kMaxDepth));
    const char c = Peek();
    if (c == '"') {
      String();
    } else if (c == '{' || c == '[') {
      const char close = c == '{' ? '}' : ']';
      ++pos_;
      SkipSpace();
      if (Peek() == close) {
        ++pos_;
        return;
      }
      while (true) {
        SkipSpace();
        if (c == '{') {
          if (Peek() != '"') Fail("expected a member name in double quotes");
          String();
          SkipSpace();
          if (Peek() != ':') Fail("expected ':' after the member name");
          ++pos_;
          SkipSpace();
        }
        Value(depth + 1);
        SkipSpace();
        if (Peek() == ',') {
          ++pos_;
          continue;
        }
        if (Peek() != close) Fail(std::string("expected ',' or '") + close + "'");
        ++pos_;
        return;
      }
    } else if (c == 't') {
      Literal("true");
    } else if (c == 'f') {
      Literal("false");
    } else if (c == 'n') {
      Literal("null");
    } else if (c == '-' || (c >= '0' && c <= '9')) {
      Number();
    } else {
      Fail("expected a JSON value");
    }
  }

  std::string path_;
  std::string text_;
  std::size_t pos_ = 0;
};

}  // namespace

std::vector<JsonMember> ReadJsonMembers(const std::string& path) {
  std::string text;
  try {
    text = ReadFileBytes(path);
  } catch (const Error&) {
    throw Error(SourceLocation{path, 0, 0}, "cannot read the file");
  }
  return JsonScanner(path, std::move(text)).TopMembers();
}

}  // namespace boldsum::config
