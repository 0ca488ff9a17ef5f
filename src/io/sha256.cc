#include "io/sha256.h"

#include <fcntl.h>
#include <unistd.h>

#include <algorithm>
#include <cerrno>
#include <cstring>
#include <vector>

#include "boldsum/error.h"
#include "boldsum/io.h"

#if defined(__x86_64__) && defined(__GNUC__)
#include <immintrin.h>
#define BOLDSUM_SHA_EXTENSIONS 1
#endif

namespace boldsum {
namespace {

// FIPS 180-4 section 4.2.2: the first 32 bits of the fractional parts of the cube roots
// of the first 64 primes.
constexpr uint32_t kRound[64] = {
    0x428a2f98, 0x71374491, 0xb5c0fbcf, 0xe9b5dba5, 0x3956c25b, 0x59f111f1, 0x923f82a4, 0xab1c5ed5,
    0xd807aa98, 0x12835b01, 0x243185be, 0x550c7dc3, 0x72be5d74, 0x80deb1fe, 0x9bdc06a7, 0xc19bf174,
    0xe49b69c1, 0xefbe4786, 0x0fc19dc6, 0x240ca1cc, 0x2de92c6f, 0x4a7484aa, 0x5cb0a9dc, 0x76f988da,
    0x983e5152, 0xa831c66d, 0xb00327c8, 0xbf597fc7, 0xc6e00bf3, 0xd5a79147, 0x06ca6351, 0x14292967,
    0x27b70a85, 0x2e1b2138, 0x4d2c6dfc, 0x53380d13, 0x650a7354, 0x766a0abb, 0x81c2c92e, 0x92722c85,
    0xa2bfe8a1, 0xa81a664b, 0xc24b8b70, 0xc76c51a3, 0xd192e819, 0xd6990624, 0xf40e3585, 0x106aa070,
    0x19a4c116, 0x1e376c08, 0x2748774c, 0x34b0bcb5, 0x391c0cb3, 0x4ed8aa4a, 0x5b9cca4f, 0x682e6ff3,
    0x748f82ee, 0x78a5636f, 0x84c87814, 0x8cc70208, 0x90befffa, 0xa4506ceb, 0xbef9a3f7, 0xc67178f2};

inline uint32_t Rotr(uint32_t x, int n) { return (x >> n) | (x << (32 - n)); }

#ifdef BOLDSUM_SHA_EXTENSIONS

bool CpuHasShaExtensions() {
  static const bool yes = __builtin_cpu_supports("sha") && __builtin_cpu_supports("sse4.1") &&
                          __builtin_cpu_supports("ssse3");
  return yes;
}

// The compression function of FIPS 180-4 section 6.2.2 with the x86 SHA instructions
// (Intel, "New Instructions Supporting the Secure Hash Algorithm on Intel Architecture
// Processors", 2013): the state is kept as the register pairs ABEF and CDGH; each
// sha256rnds2 does two rounds, sha256msg1/msg2 extend the message schedule.
__attribute__((target("sha,sse4.1,ssse3"))) void CompressWithShaExtensions(
    uint32_t* state, const unsigned char* data, size_t blocks) {
  const __m128i byte_swap = _mm_set_epi64x(0x0c0d0e0f08090a0bULL, 0x0405060700010203ULL);
  __m128i dcba = _mm_shuffle_epi32(_mm_loadu_si128(reinterpret_cast<const __m128i*>(state)), 0xB1);
  __m128i cdgh =
      _mm_shuffle_epi32(_mm_loadu_si128(reinterpret_cast<const __m128i*>(state + 4)), 0x1B);
  __m128i abef = _mm_alignr_epi8(dcba, cdgh, 8);
  cdgh = _mm_blend_epi16(cdgh, dcba, 0xF0);
  for (; blocks > 0; --blocks, data += 64) {
    const __m128i abef_before = abef, cdgh_before = cdgh;
    __m128i w[4];  // W[4i .. 4i+3] of the last four groups of rounds, by i mod 4
#pragma GCC unroll 16
    for (int i = 0; i < 16; ++i) {
      __m128i m;
      if (i < 4) {
        m = _mm_shuffle_epi8(_mm_loadu_si128(reinterpret_cast<const __m128i*>(data + 16 * i)),
                             byte_swap);
      } else {
        // W[t] = sigma1(W[t-2]) + W[t-7] + sigma0(W[t-15]) + W[t-16], four at a time.
        m = _mm_sha256msg1_epu32(w[i & 3], w[(i + 1) & 3]);
        m = _mm_add_epi32(m, _mm_alignr_epi8(w[(i + 3) & 3], w[(i + 2) & 3], 4));
        m = _mm_sha256msg2_epu32(m, w[(i + 3) & 3]);
      }
      w[i & 3] = m;
      __m128i wk =
          _mm_add_epi32(m, _mm_loadu_si128(reinterpret_cast<const __m128i*>(kRound + 4 * i)));
      cdgh = _mm_sha256rnds2_epu32(cdgh, abef, wk);
      wk = _mm_shuffle_epi32(wk, 0x0E);
      abef = _mm_sha256rnds2_epu32(abef, cdgh, wk);
    }
    abef = _mm_add_epi32(abef, abef_before);
    cdgh = _mm_add_epi32(cdgh, cdgh_before);
  }
  const __m128i feba = _mm_shuffle_epi32(abef, 0x1B);
  const __m128i dchg = _mm_shuffle_epi32(cdgh, 0xB1);
  _mm_storeu_si128(reinterpret_cast<__m128i*>(state), _mm_blend_epi16(feba, dchg, 0xF0));
  _mm_storeu_si128(reinterpret_cast<__m128i*>(state + 4), _mm_alignr_epi8(dchg, feba, 8));
}

#endif  // BOLDSUM_SHA_EXTENSIONS

}  // namespace

// FIPS 180-4 section 5.3.3: initial hash value.
Sha256Hasher::Sha256Hasher(bool allow_sha_extensions)
    : state_{0x6a09e667, 0xbb67ae85, 0x3c6ef372, 0xa54ff53a,
             0x510e527f, 0x9b05688c, 0x1f83d9ab, 0x5be0cd19} {
#ifdef BOLDSUM_SHA_EXTENSIONS
  sha_extensions_ = allow_sha_extensions && CpuHasShaExtensions();
#else
  (void)allow_sha_extensions;
#endif
}

void Sha256Hasher::Compress(const unsigned char* data, size_t blocks) {
#ifdef BOLDSUM_SHA_EXTENSIONS
  if (sha_extensions_) {
    CompressWithShaExtensions(state_.data(), data, blocks);
    return;
  }
#endif
  for (; blocks > 0; --blocks, data += 64) {
    const unsigned char* block = data;
    uint32_t w[64];
    for (int t = 0; t < 16; ++t) {
      w[t] = uint32_t{block[4 * t]} << 24 | uint32_t{block[4 * t + 1]} << 16 |
             uint32_t{block[4 * t + 2]} << 8 | uint32_t{block[4 * t + 3]};
    }
    for (int t = 16; t < 64; ++t) {
      const uint32_t s0 = Rotr(w[t - 15], 7) ^ Rotr(w[t - 15], 18) ^ (w[t - 15] >> 3);
      const uint32_t s1 = Rotr(w[t - 2], 17) ^ Rotr(w[t - 2], 19) ^ (w[t - 2] >> 10);
      w[t] = w[t - 16] + s0 + w[t - 7] + s1;
    }
    uint32_t a = state_[0], b = state_[1], c = state_[2], d = state_[3];
    uint32_t e = state_[4], f = state_[5], g = state_[6], h = state_[7];
    for (int t = 0; t < 64; ++t) {
      const uint32_t big_s1 = Rotr(e, 6) ^ Rotr(e, 11) ^ Rotr(e, 25);
      const uint32_t ch = (e & f) ^ (~e & g);
      const uint32_t t1 = h + big_s1 + ch + kRound[t] + w[t];
      const uint32_t big_s0 = Rotr(a, 2) ^ Rotr(a, 13) ^ Rotr(a, 22);
      const uint32_t maj = (a & b) ^ (a & c) ^ (b & c);
      const uint32_t t2 = big_s0 + maj;
      h = g;
      g = f;
      f = e;
      e = d + t1;
      d = c;
      c = b;
      b = a;
      a = t1 + t2;
    }
    state_[0] += a;
    state_[1] += b;
    state_[2] += c;
    state_[3] += d;
    state_[4] += e;
    state_[5] += f;
    state_[6] += g;
    state_[7] += h;
  }
}

void Sha256Hasher::Update(const void* data, size_t size) {
  const unsigned char* p = static_cast<const unsigned char*>(data);
  total_bytes_ += size;
  if (buffered_ > 0) {
    const size_t take = std::min(size, 64 - buffered_);
    std::memcpy(buffer_ + buffered_, p, take);
    buffered_ += take;
    p += take;
    size -= take;
    if (buffered_ < 64) return;
    Compress(buffer_, 1);
    buffered_ = 0;
  }
  const size_t blocks = size / 64;
  if (blocks > 0) Compress(p, blocks);
  p += 64 * blocks;
  size -= 64 * blocks;
  std::memcpy(buffer_, p, size);
  buffered_ = size;
}

std::string Sha256Hasher::HexDigest() {
  // FIPS 180-4 section 5.1.1: a 1 bit, zeros to 56 mod 64 bytes, the length in bits.
  const uint64_t bits = total_bytes_ * 8;
  unsigned char pad[72] = {0x80};
  const size_t pad_size = (buffered_ < 56 ? 56 : 120) - buffered_;
  for (int i = 0; i < 8; ++i) pad[pad_size + i] = static_cast<unsigned char>(bits >> (56 - 8 * i));
  Update(pad, pad_size + 8);
  static const char kHex[] = "0123456789abcdef";
  std::string hex;
  for (uint32_t word : state_) {
    for (int shift = 28; shift >= 0; shift -= 4) hex += kHex[(word >> shift) & 0xf];
  }
  return hex;
}

std::string Sha256(const std::string& bytes) {
  Sha256Hasher hasher;
  hasher.Update(bytes.data(), bytes.size());
  return hasher.HexDigest();
}

std::string FileSha256(const std::string& path) {
  const int fd = ::open(path.c_str(), O_RDONLY | O_CLOEXEC);
  if (fd < 0) throw Error(path + ": cannot open (" + std::strerror(errno) + ")");
  Sha256Hasher hasher;
  std::vector<unsigned char> buffer(size_t{1} << 20);
  for (;;) {
    const ssize_t n = ::read(fd, buffer.data(), buffer.size());
    if (n < 0 && errno == EINTR) continue;
    if (n < 0) {
      const std::string reason = std::strerror(errno);
      ::close(fd);
      throw Error(path + ": read error (" + reason + ")");
    }
    if (n == 0) break;
    hasher.Update(buffer.data(), static_cast<size_t>(n));
  }
  ::close(fd);
  return hasher.HexDigest();
}

}  // namespace boldsum
