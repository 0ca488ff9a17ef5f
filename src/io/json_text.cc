#include <charconv>
#include <cmath>
#include <cstdio>
#include <string>

#include "boldsum/io.h"

namespace boldsum {
namespace {

// Length of the valid UTF-8 sequence at text[i], or 0 when the bytes there are not one.
// `consumed` receives the bytes to replace by one U+FFFD otherwise: the maximal subpart
// of an ill-formed sequence (Unicode Standard, chapter 3, "U+FFFD Substitution of
// Maximal Subparts"), at least one byte.
size_t Utf8Sequence(const std::string& text, size_t i, size_t* consumed) {
  const unsigned char lead = static_cast<unsigned char>(text[i]);
  size_t length;
  unsigned char low = 0x80, high = 0xbf;  // allowed range of the second byte
  if (lead < 0x80) {
    return 1;
  } else if (lead >= 0xc2 && lead <= 0xdf) {
    length = 2;
  } else if (lead >= 0xe0 && lead <= 0xef) {
    length = 3;
    if (lead == 0xe0) low = 0xa0;        // no overlong forms
    if (lead == 0xed) high = 0x9f;       // no surrogates
  } else if (lead >= 0xf0 && lead <= 0xf4) {
    length = 4;
    if (lead == 0xf0) low = 0x90;        // no overlong forms
    if (lead == 0xf4) high = 0x8f;       // nothing above U+10FFFF
  } else {
    *consumed = 1;
    return 0;
  }
  size_t k = 1;
  for (; k < length && i + k < text.size(); ++k) {
    const unsigned char byte = static_cast<unsigned char>(text[i + k]);
    const unsigned char lo = k == 1 ? low : 0x80, hi = k == 1 ? high : 0xbf;
    if (byte < lo || byte > hi) break;
  }
  if (k == length) return length;
  *consumed = k;
  return 0;
}

}  // namespace

std::string JsonQuote(const std::string& text) {
  std::string out = "\"";
  out.reserve(text.size() + 2);
  for (size_t i = 0; i < text.size();) {
    const unsigned char c = static_cast<unsigned char>(text[i]);
    if (c < 0x80) {
      switch (c) {
        case '"': out += "\\\""; break;
        case '\\': out += "\\\\"; break;
        case '\b': out += "\\b"; break;
        case '\f': out += "\\f"; break;
        case '\n': out += "\\n"; break;
        case '\r': out += "\\r"; break;
        case '\t': out += "\\t"; break;
        default:
          if (c < 0x20) {
            char escape[8];
            std::snprintf(escape, sizeof escape, "\\u%04x", c);
            out += escape;
          } else {
            out += static_cast<char>(c);
          }
      }
      ++i;
      continue;
    }
    size_t consumed = 0;
    const size_t length = Utf8Sequence(text, i, &consumed);
    if (length > 0) {
      out.append(text, i, length);
      i += length;
    } else {
      out += "\xef\xbf\xbd";  // U+FFFD REPLACEMENT CHARACTER
      i += consumed;
    }
  }
  out += '"';
  return out;
}

std::string JsonNumber(double value) {
  if (!std::isfinite(value)) return "null";
  // "-0" would read back as the integer 0 in many JSON readers (Python's among them).
  if (value == 0 && std::signbit(value)) return "-0.0";
  // The fewest significant digits that read back to the same double (C++17 to_chars,
  // scientific form), laid out as Python's repr does: fixed notation for decimal
  // exponents -4 to 15, otherwise d.ddde+XX; no ".0" after an integer.
  char buffer[40];
  const auto result =
      std::to_chars(buffer, buffer + sizeof buffer, value, std::chars_format::scientific);
  const std::string text(buffer, result.ptr);
  const size_t e = text.find('e');
  const bool negative = text[0] == '-';
  std::string digits;
  for (size_t i = negative ? 1 : 0; i < e; ++i) {
    if (text[i] != '.') digits += text[i];
  }
  const int exponent = std::stoi(text.substr(e + 1));
  std::string out = negative ? "-" : "";
  if (exponent >= -4 && exponent < 16) {
    if (exponent < 0) {
      out += "0." + std::string(static_cast<size_t>(-exponent - 1), '0') + digits;
    } else if (digits.size() <= static_cast<size_t>(exponent) + 1) {
      out += digits + std::string(static_cast<size_t>(exponent) + 1 - digits.size(), '0');
    } else {
      out += digits.substr(0, static_cast<size_t>(exponent) + 1) + "." +
             digits.substr(static_cast<size_t>(exponent) + 1);
    }
    return out;
  }
  out += digits.substr(0, 1);
  if (digits.size() > 1) out += "." + digits.substr(1);
  return out + text.substr(e);
}

}  // namespace boldsum
