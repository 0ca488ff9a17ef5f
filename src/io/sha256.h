// Internal: incremental SHA-256 (FIPS 180-4, section 6.2).
#pragma once

#include <array>
#include <cstddef>
#include <cstdint>
#include <string>

namespace boldsum {

class Sha256Hasher {
 public:
  // The x86 SHA extensions are used when the CPU has them (checked at run time) unless
  // `allow_sha_extensions` is false; both paths give the same digest.
  explicit Sha256Hasher(bool allow_sha_extensions = true);
  void Update(const void* data, size_t size);
  // The digest as 64 lowercase hex digits. The hasher must not be updated afterwards.
  std::string HexDigest();

 private:
  // Processes `blocks` consecutive 64-byte blocks.
  void Compress(const unsigned char* data, size_t blocks);

  std::array<uint32_t, 8> state_;
  bool sha_extensions_ = false;
  unsigned char buffer_[64];
  size_t buffered_ = 0;
  uint64_t total_bytes_ = 0;
};

}  // namespace boldsum
