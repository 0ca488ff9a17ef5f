// Internal: incremental SHA-256 (FIPS 180-4, section 6.2).
#pragma once

#include <array>
#include <cstddef>
#include <cstdint>
#include <string>

namespace boldsum {

class Sha256Hasher {
 public:
  Sha256Hasher();
  void Update(const void* data, size_t size);
  // The digest as 64 lowercase hex digits. The hasher must not be updated afterwards.
  std::string HexDigest();

 private:
  void Compress(const unsigned char* block);

  std::array<uint32_t, 8> state_;
  unsigned char buffer_[64];
  size_t buffered_ = 0;
  uint64_t total_bytes_ = 0;
};

}  // namespace boldsum
