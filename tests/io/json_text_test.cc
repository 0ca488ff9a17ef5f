// JSON text: string escapes per RFC 8259 section 7, U+FFFD for ill-formed UTF-8 per the
// Unicode Standard (chapter 3, Table 3-8), numbers that read back exactly.
// tests/reference/test_nifti_io.py parses many more outputs with Python's json module.
#include <gtest/gtest.h>
#include <rapidcheck/gtest.h>

#include <cmath>
#include <cstdlib>
#include <cstring>
#include <limits>

#include "boldsum/io.h"

namespace boldsum {
namespace {

TEST(JsonQuote, Escapes) {
  EXPECT_EQ(JsonQuote(""), "\"\"");
  EXPECT_EQ(JsonQuote("melody A"), "\"melody A\"");
  EXPECT_EQ(JsonQuote("a\"b\\c/d"), "\"a\\\"b\\\\c/d\"");
  EXPECT_EQ(JsonQuote("\b\f\n\r\t"), "\"\\b\\f\\n\\r\\t\"");
  EXPECT_EQ(JsonQuote(std::string("\x00\x01\x1f\x7f", 4)), "\"\\u0000\\u0001\\u001f\x7f\"");
}

TEST(JsonQuote, Utf8) {
  // Valid sequences of 2, 3 and 4 bytes pass unchanged: é, €, U+1F3B5 (musical note).
  const std::string valid = "caf\xc3\xa9 \xe2\x82\xac \xf0\x9f\x8e\xb5";
  EXPECT_EQ(JsonQuote(valid), "\"" + valid + "\"");
  // Unicode Standard Table 3-8: 61 F1 80 80 E1 80 C2 62 80 63 80 BF 64 decodes to
  // a FFFD FFFD FFFD b FFFD c FFFD FFFD d.
  const std::string fffd = "\xef\xbf\xbd";
  EXPECT_EQ(JsonQuote("\x61\xf1\x80\x80\xe1\x80\xc2\x62\x80\x63\x80\xbf\x64"),
            "\"a" + fffd + fffd + fffd + "b" + fffd + "c" + fffd + fffd + "d\"");
  // Overlong form, surrogate, beyond U+10FFFF: each byte is its own maximal subpart
  // (the same as Python's bytes.decode("utf-8", "replace")).
  EXPECT_EQ(JsonQuote("\xc0\xaf"), "\"" + fffd + fffd + "\"");
  EXPECT_EQ(JsonQuote("\xed\xa0\x80"), "\"" + fffd + fffd + fffd + "\"");
  EXPECT_EQ(JsonQuote("\xf4\x90\x80\x80"), "\"" + fffd + fffd + fffd + fffd + "\"");
  EXPECT_EQ(JsonQuote("\xe2\x82"), "\"" + fffd + "\"");  // truncated at the end
}

TEST(JsonNumber, Forms) {
  EXPECT_EQ(JsonNumber(0.0), "0");
  EXPECT_EQ(JsonNumber(-0.0), "-0.0");  // "-0" reads back as the integer 0 in Python
  EXPECT_EQ(JsonNumber(0.1), "0.1");
  EXPECT_EQ(JsonNumber(-2.5), "-2.5");
  EXPECT_EQ(JsonNumber(100), "100");
  EXPECT_EQ(JsonNumber(1e21), "1e+21");
  EXPECT_EQ(JsonNumber(1.0 / 3), "0.3333333333333333");
  EXPECT_EQ(JsonNumber(1e-5), "1e-05");   // Python's repr: scientific below 1e-4
  EXPECT_EQ(JsonNumber(1e15), "1000000000000000");
  EXPECT_EQ(JsonNumber(1e16), "1e+16");   // and from 1e16 up
  EXPECT_EQ(JsonNumber(5.369532353602852e17), "5.369532353602852e+17");
  EXPECT_EQ(JsonNumber(5e-324), "5e-324");
  EXPECT_EQ(JsonNumber(std::numeric_limits<double>::max()), "1.7976931348623157e+308");
  EXPECT_EQ(JsonNumber(std::nan("")), "null");
  EXPECT_EQ(JsonNumber(std::numeric_limits<double>::infinity()), "null");
  EXPECT_EQ(JsonNumber(-std::numeric_limits<double>::infinity()), "null");
}

// Property: any finite double reads back (strtod) to the same bits.
RC_GTEST_PROP(JsonNumber, RoundTrips, (uint64_t bits)) {
  double value;
  std::memcpy(&value, &bits, sizeof value);
  const std::string text = JsonNumber(value);
  if (!std::isfinite(value)) {
    RC_ASSERT(text == "null");
    return;
  }
  const double back = std::strtod(text.c_str(), nullptr);
  RC_ASSERT(std::memcmp(&back, &value, sizeof value) == 0);
}

}  // namespace
}  // namespace boldsum
