// Internal: sequential reading of a file's bytes from an offset, inflating gzip on the
// fly, with bounded memory.
#pragma once

#include <cstddef>
#include <cstdint>
#include <memory>
#include <string>
#include <vector>

struct inflate_state;  // ISA-L

namespace boldsum {

class ByteSource {
 public:
  // Files that start with the gzip magic bytes (1f 8b) are inflated, one member after
  // another as `gzip -dc` does; any other file is read as is. `offset` counts
  // uncompressed bytes. `buffer_bytes` is the size of the compressed-input buffer.
  // Throws Error("<path>: ...") when the file cannot be opened or is shorter than
  // `offset`.
  ByteSource(const std::string& path, int64_t offset, size_t buffer_bytes = size_t{1} << 20);
  ~ByteSource();
  ByteSource(const ByteSource&) = delete;
  ByteSource& operator=(const ByteSource&) = delete;

  bool IsCompressed() const { return compressed_; }

  // Reads up to `n` bytes into `dst`; returns the number read, which is less than `n`
  // only when the data ends. Throws Error("<path>: ...") on a read error or corrupt
  // gzip data.
  size_t Read(void* dst, size_t n);

  // For gzip, reads on to the end of the last member so that its CRC-32 and length are
  // checked (RFC 1952); throws Error when they do not match or the trailer is missing.
  // Nothing to do for an uncompressed file.
  void CheckToEnd();

 private:
  bool Refill();  // false at the end of the file
  // Reads one byte of compressed input; false at the end of the file.
  bool TakeByte(unsigned char* byte);
  // Reads and checks a gzip member header (RFC 1952 section 2.3) after its magic bytes;
  // throws Error on a bad one, returns false when the file ends inside it.
  bool ReadMemberHeader();
  // After the end of a member's deflate data: checks its CRC-32 and length.
  void CheckMemberTrailer();
  bool StartNextMember();  // after a member's end: true when another member follows
  void PutBackOverread();  // at a member's end: input the inflater read past it
  void Skip(int64_t n);

  std::string path_;
  int fd_ = -1;
  bool compressed_ = false;
  bool input_done_ = false;   // the file has been read to its end
  bool stream_done_ = false;  // the last gzip member ended
  // Compressed input: kHeadroom bytes in front of the data that Refill() keeps, so that
  // bytes the inflater read past the end of a member can be put back before next_in_.
  static constexpr size_t kHeadroom = 16;
  std::vector<unsigned char> in_;
  unsigned char* next_in_ = nullptr;
  size_t avail_in_ = 0;
  // Raw deflate by ISA-L's inflater (about twice zlib's speed), which also keeps the
  // CRC-32 of the output; the gzip framing is read here.
  std::unique_ptr<inflate_state> inflater_;
  uint32_t member_bytes_ = 0;  // its length modulo 2^32
};

}  // namespace boldsum
