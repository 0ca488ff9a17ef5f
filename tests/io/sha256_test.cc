// SHA-256 against the examples published with FIPS 180-2 (Appendix B; the digests were
// also checked with Python's hashlib), plus the block-boundary lengths around the
// padding rule. tests/reference/test_nifti_io.py compares many more inputs with hashlib.
#include <gtest/gtest.h>
#include <rapidcheck/gtest.h>

#include <fstream>

#include "boldsum/io.h"
#include "io/sha256.h"
#include "nifti_files.h"

namespace boldsum {
namespace {

TEST(Sha256, PublishedExamples) {
  // FIPS 180-2 Appendix B.1, B.2, B.3; the empty message from NIST's example values.
  EXPECT_EQ(Sha256(""), "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855");
  EXPECT_EQ(Sha256("abc"), "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad");
  EXPECT_EQ(Sha256("abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq"),
            "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1");
  EXPECT_EQ(Sha256(std::string(1000000, 'a')),
            "cdc76e5c9914fb9281a1c7e284d73e67f1809a48a497200e046d39ccc7112cd0");
}

TEST(Sha256, PaddingBoundaries) {
  // Python: hashlib.sha256(b"a" * n).hexdigest() for n = 55, 56, 63, 64, 65.
  EXPECT_EQ(Sha256(std::string(55, 'a')),
            "9f4390f8d30c2dd92ec9f095b65e2b9ae9b0a925a5258e241c9f1e910f734318");
  EXPECT_EQ(Sha256(std::string(56, 'a')),
            "b35439a4ac6f0948b6d6f9e3c6af0f5f590ce20f1bde7090ef7970686ec6738a");
  EXPECT_EQ(Sha256(std::string(63, 'a')),
            "7d3e74a05d7db15bce4ad9ec0658ea98e3f06eeecf16b4c6fff2da457ddc2f34");
  EXPECT_EQ(Sha256(std::string(64, 'a')),
            "ffe054fe7ae0cb6dc65c3af9b61d5209f439851db43d0ba5997337df154668eb");
  EXPECT_EQ(Sha256(std::string(65, 'a')),
            "635361c48bb9eab14198e76ea8ab7f1a41685d6ad62aa9146d301d4f17eb0ae0");
}

TEST(Sha256, FileMatchesBytes) {
  testing::ScratchDir dir;
  std::string bytes;
  for (int i = 0; i < 3 * 1048576 + 17; ++i) bytes += static_cast<char>(i * 7 + i / 251);
  std::ofstream(dir / "f.bin", std::ios::binary) << bytes;
  EXPECT_EQ(FileSha256(dir / "f.bin"), Sha256(bytes));
  try {
    FileSha256(dir / "none");
    ADD_FAILURE();
  } catch (const Error& e) {
    EXPECT_EQ(std::string(e.what()), dir / "none" + ": cannot open (No such file or directory)");
  }
}

std::string Digest(const std::string& bytes, bool allow_sha_extensions) {
  Sha256Hasher hasher(allow_sha_extensions);
  hasher.Update(bytes.data(), bytes.size());
  return hasher.HexDigest();
}

// The portable compression function and the x86 SHA-extension one (taken when the CPU
// has it) on the FIPS 180-2 Appendix B examples, whole and fed in odd pieces.
TEST(Sha256, BothCompressionPathsGiveThePublishedDigests) {
  const std::pair<std::string, std::string> examples[] = {
      {"abc", "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"},
      {"abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq",
       "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1"},
      {std::string(1000000, 'a'),
       "cdc76e5c9914fb9281a1c7e284d73e67f1809a48a497200e046d39ccc7112cd0"}};
  for (bool allow : {false, true}) {
    for (const auto& [text, digest] : examples) {
      EXPECT_EQ(Digest(text, allow), digest) << "allow_sha_extensions " << allow;
      Sha256Hasher pieces(allow);
      for (size_t at = 0; at < text.size(); at += 997) {
        pieces.Update(text.data() + at, std::min<size_t>(997, text.size() - at));
      }
      EXPECT_EQ(pieces.HexDigest(), digest) << "allow_sha_extensions " << allow;
    }
  }
}

// Property: both compression paths agree on any bytes.
RC_GTEST_PROP(Sha256, CompressionPathsAgree, (const std::string& text)) {
  RC_ASSERT(Digest(text, true) == Digest(text, false));
}

// Property: feeding the bytes in pieces of any sizes gives the one-shot digest.
RC_GTEST_PROP(Sha256, PiecesGiveTheSameDigest, (const std::string& text)) {
  const auto cuts = *rc::gen::container<std::vector<int>>(rc::gen::inRange(0, 130));
  Sha256Hasher hasher;
  size_t at = 0;
  for (int cut : cuts) {
    const size_t n = std::min(static_cast<size_t>(cut), text.size() - at);
    hasher.Update(text.data() + at, n);
    at += n;
  }
  hasher.Update(text.data() + at, text.size() - at);
  RC_ASSERT(hasher.HexDigest() == Sha256(text));
}

}  // namespace
}  // namespace boldsum
