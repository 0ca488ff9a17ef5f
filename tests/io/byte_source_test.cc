// ByteSource on gzip streams built by zlib (an outside encoder): any payload split into
// any number of members, each at any compression level and strategy (stored, fixed and
// dynamic Huffman blocks), read back through buffers of any size, gives the payload
// byte for byte; the end of every member is found exactly (the inflater reads ahead of
// it), so the trailers are checked and bytes after the last member are ignored.
#include "io/byte_source.h"

#include <gtest/gtest.h>
#include <rapidcheck/gtest.h>
#include <zlib.h>

#include <fstream>
#include <string>

#include "boldsum/error.h"
#include "nifti_files.h"

namespace boldsum {
namespace {

using testing::ScratchDir;

std::string GzipMember(const std::string& data, int level, int strategy) {
  z_stream zs{};
  // 15 + 16: a gzip wrapper (RFC 1952) around the deflate data.
  if (deflateInit2(&zs, level, Z_DEFLATED, 15 + 16, 8, strategy) != Z_OK) return "";
  std::string out(deflateBound(&zs, data.size()) + 64, '\0');
  zs.next_in = reinterpret_cast<Bytef*>(const_cast<char*>(data.data()));
  zs.avail_in = static_cast<uInt>(data.size());
  zs.next_out = reinterpret_cast<Bytef*>(out.data());
  zs.avail_out = static_cast<uInt>(out.size());
  deflate(&zs, Z_FINISH);
  out.resize(zs.total_out);
  deflateEnd(&zs);
  return out;
}

std::string ReadAll(const std::string& path, size_t buffer_bytes, size_t read_size) {
  ByteSource source(path, 0, buffer_bytes);
  std::string out;
  std::string chunk(read_size, '\0');
  for (;;) {
    const size_t got = source.Read(chunk.data(), chunk.size());
    out.append(chunk.data(), got);
    if (got < chunk.size()) break;
  }
  source.CheckToEnd();
  return out;
}

RC_GTEST_PROP(ByteSource, AnyMembersLevelsAndBuffers, ()) {
  // A payload with runs (compressible) and noise (not), so blocks of every kind occur.
  const int size = *rc::gen::inRange(0, 300000);
  std::string payload(static_cast<size_t>(size), '\0');
  uint32_t state = *rc::gen::arbitrary<uint32_t>();
  for (int i = 0; i < size;) {
    const int run = 1 + static_cast<int>((state = state * 1664525u + 1013904223u) >> 20) % 5000;
    const bool noisy = (state >> 7) & 1;
    const char repeated = static_cast<char>(state >> 24);
    for (int j = 0; j < run && i < size; ++j, ++i) {
      payload[static_cast<size_t>(i)] =
          noisy ? static_cast<char>((state = state * 1664525u + 1013904223u) >> 24) : repeated;
    }
  }
  const int members = *rc::gen::inRange(1, 5);
  std::string file;
  size_t start = 0;
  for (int m = 0; m < members; ++m) {
    const size_t end = m + 1 == members
                           ? payload.size()
                           : start + (payload.size() - start) * *rc::gen::inRange(0, 101) / 100;
    const int level = *rc::gen::inRange(0, 10);
    const int strategy =
        *rc::gen::element(Z_DEFAULT_STRATEGY, Z_FILTERED, Z_HUFFMAN_ONLY, Z_RLE, Z_FIXED);
    file += GzipMember(payload.substr(start, end - start), level, strategy);
    start = end;
  }
  const bool garbage = *rc::gen::arbitrary<bool>();
  if (garbage) file += std::string("\x00\x01not gzip", 10);
  ScratchDir dir;
  const std::string path = dir / "p.gz";
  std::ofstream(path, std::ios::binary) << file;
  const size_t buffer = *rc::gen::inRange<size_t>(4096, 70000);
  const size_t read_size = *rc::gen::inRange<size_t>(1, 200000);
  RC_ASSERT(ReadAll(path, buffer, read_size) == payload);
}

TEST(ByteSource, DamagedDeflateDataIsReported) {
  std::string payload(100000, '\0');
  for (size_t i = 0; i < payload.size(); ++i) payload[i] = static_cast<char>((i * i) % 97);
  std::string file = GzipMember(payload, 6, Z_DEFAULT_STRATEGY);
  ScratchDir dir;
  const std::string path = dir / "bad.gz";
  int reported = 0;
  for (size_t at = 20; at + 8 < file.size(); at += file.size() / 23) {
    std::string damaged = file;
    damaged[at] = static_cast<char>(damaged[at] ^ 0x5a);
    std::ofstream(path, std::ios::binary) << damaged;
    try {
      const std::string out = ReadAll(path, 4096, 65536);
      // A flip may still decode; then the CRC-32 or length check must catch it.
      ADD_FAILURE() << "damage at byte " << at << " not reported (" << out.size() << " bytes)";
    } catch (const Error& e) {
      EXPECT_EQ(std::string(e.what()).find(path + ": corrupt gzip data ("), 0u) << e.what();
      ++reported;
    }
  }
  EXPECT_GT(reported, 10);
}

}  // namespace
}  // namespace boldsum
