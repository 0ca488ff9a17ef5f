#include "io/byte_source.h"

#include <fcntl.h>
#include <isa-l/igzip_lib.h>
#include <unistd.h>

#include <algorithm>
#include <cerrno>
#include <cstring>
#include <limits>

#include "boldsum/error.h"

namespace boldsum {
namespace {

// The inflater takes at most this many bytes per call (its counters are 32-bit).
constexpr size_t kMaxChunk = size_t{1} << 30;

}  // namespace

ByteSource::ByteSource(const std::string& path, int64_t offset, size_t buffer_bytes)
    : path_(path), in_(kHeadroom + std::max<size_t>(buffer_bytes, 4096)) {
  next_in_ = in_.data() + kHeadroom;
  fd_ = ::open(path.c_str(), O_RDONLY | O_CLOEXEC);
  if (fd_ < 0) throw Error(path + ": cannot open (" + std::strerror(errno) + ")");
#ifdef POSIX_FADV_SEQUENTIAL
  ::posix_fadvise(fd_, 0, 0, POSIX_FADV_SEQUENTIAL);
#endif
  try {
    Refill();
    compressed_ = avail_in_ >= 2 && next_in_[0] == 0x1f && next_in_[1] == 0x8b;
    if (compressed_) {
      inflater_ = std::make_unique<inflate_state>();
      next_in_ += 2;
      avail_in_ -= 2;
      if (!ReadMemberHeader()) stream_done_ = true;  // Read() reports the truncation
    }
    Skip(offset);
  } catch (...) {
    ::close(fd_);
    throw;
  }
}

ByteSource::~ByteSource() {
  if (fd_ >= 0) ::close(fd_);
}

bool ByteSource::Refill() {
  // Keep unread bytes at the front (after the headroom), then fill the rest.
  unsigned char* const start = in_.data() + kHeadroom;
  size_t got = avail_in_;
  if (got > 0 && next_in_ != start) std::memmove(start, next_in_, got);
  const size_t capacity = in_.size() - kHeadroom;
  while (got < capacity && !input_done_) {
    const ssize_t n = ::read(fd_, start + got, capacity - got);
    if (n < 0) {
      if (errno == EINTR) continue;
      throw Error(path_ + ": read error (" + std::strerror(errno) + ")");
    }
    if (n == 0) input_done_ = true;
    got += static_cast<size_t>(n);
  }
  const bool more = got > avail_in_;
  next_in_ = start;
  avail_in_ = got;
  return more;
}

bool ByteSource::TakeByte(unsigned char* byte) {
  if (avail_in_ == 0) Refill();
  if (avail_in_ == 0) return false;
  *byte = *next_in_++;
  --avail_in_;
  return true;
}

bool ByteSource::ReadMemberHeader() {
  // CM, FLG, MTIME (4), XFL, OS; then the optional fields FLG announces.
  unsigned char fixed[8];
  for (unsigned char& b : fixed) {
    if (!TakeByte(&b)) return false;
  }
  const unsigned char flags = fixed[1];
  if (fixed[0] != 8) throw Error(path_ + ": corrupt gzip data (unknown compression method)");
  if (flags & 0xe0) throw Error(path_ + ": corrupt gzip data (unknown header flags set)");
  unsigned char b;
  if (flags & 0x04) {  // FEXTRA: XLEN, then XLEN bytes
    unsigned char len[2];
    if (!TakeByte(&len[0]) || !TakeByte(&len[1])) return false;
    for (int n = len[0] | len[1] << 8; n > 0; --n) {
      if (!TakeByte(&b)) return false;
    }
  }
  for (const unsigned char field : {0x08, 0x10}) {  // FNAME, FCOMMENT: zero-terminated
    if (!(flags & field)) continue;
    do {
      if (!TakeByte(&b)) return false;
    } while (b != 0);
  }
  if (flags & 0x02) {  // FHCRC: two bytes, not checked (as gzip does not)
    if (!TakeByte(&b) || !TakeByte(&b)) return false;
  }
  isal_inflate_init(inflater_.get());
  inflater_->crc_flag = ISAL_GZIP_NO_HDR;  // raw deflate; the CRC-32 of the output is kept
  member_bytes_ = 0;
  return true;
}

void ByteSource::CheckMemberTrailer() {
  unsigned char t[8];
  for (unsigned char& b : t) {
    if (!TakeByte(&b)) {
      throw Error(path_ + ": file ends before the end of its gzip stream (truncated)");
    }
  }
  const uint32_t crc =
      uint32_t{t[0]} | uint32_t{t[1]} << 8 | uint32_t{t[2]} << 16 | uint32_t{t[3]} << 24;
  const uint32_t size =
      uint32_t{t[4]} | uint32_t{t[5]} << 8 | uint32_t{t[6]} << 16 | uint32_t{t[7]} << 24;
  if (crc != inflater_->crc) throw Error(path_ + ": corrupt gzip data (incorrect data check)");
  if (size != member_bytes_) throw Error(path_ + ": corrupt gzip data (incorrect length check)");
}

bool ByteSource::StartNextMember() {
  if (avail_in_ < 2) Refill();
  // Bytes after a member that do not start another one are ignored, as gzip does.
  if (avail_in_ < 2 || next_in_[0] != 0x1f || next_in_[1] != 0x8b) return false;
  next_in_ += 2;
  avail_in_ -= 2;
  if (!ReadMemberHeader()) {
    throw Error(path_ + ": file ends before the end of its gzip stream (truncated)");
  }
  return true;
}

void ByteSource::PutBackOverread() {
  // The inflater reads input 8 bytes at a time into a bit buffer. At the end of the
  // deflate data, the bits it has not used are the padding of the last byte and then
  // whole bytes that follow the stream (the trailer): they go back in front of next_in_.
  inflate_state& state = *inflater_;
  if (state.tmp_in_size != 0) {  // input held back inside a block header: not expected here
    throw Error(path_ + ": corrupt gzip data (cannot find the end of a member)");
  }
  const int bits = state.read_in_length;
  const int whole = bits / 8;
  const int padding = bits % 8;
  for (int i = whole - 1; i >= 0; --i) {
    --next_in_;  // never before in_.data(): Refill() leaves kHeadroom >= 8 bytes free
    *next_in_ = static_cast<unsigned char>(state.read_in >> (padding + 8 * i));
    ++avail_in_;
  }
  state.read_in = 0;
  state.read_in_length = 0;
}

size_t ByteSource::Read(void* dst, size_t n) {
  unsigned char* out = static_cast<unsigned char*>(dst);
  size_t done = 0;
  if (!compressed_) {
    // Serve what is left in the buffer, then read straight into `dst`.
    const size_t buffered = std::min<size_t>(avail_in_, n);
    if (buffered > 0) {
      std::memcpy(out, next_in_, buffered);
      next_in_ += buffered;
      avail_in_ -= buffered;
      done = buffered;
    }
    while (done < n && !input_done_) {
      const ssize_t got = ::read(fd_, out + done, std::min(n - done, kMaxChunk));
      if (got < 0) {
        if (errno == EINTR) continue;
        throw Error(path_ + ": read error (" + std::strerror(errno) + ")");
      }
      if (got == 0) input_done_ = true;
      done += static_cast<size_t>(got);
    }
    return done;
  }
  inflate_state& state = *inflater_;
  while (done < n && !stream_done_) {
    if (avail_in_ == 0) Refill();
    const size_t want = std::min(n - done, kMaxChunk);
    const uint32_t offered = static_cast<uint32_t>(std::min<size_t>(avail_in_, kMaxChunk));
    state.next_in = next_in_;
    state.avail_in = offered;
    state.next_out = out + done;
    state.avail_out = static_cast<uint32_t>(want);
    const int ret = isal_inflate(&state);
    next_in_ += offered - state.avail_in;
    avail_in_ -= offered - state.avail_in;
    const size_t produced = want - state.avail_out;
    member_bytes_ += static_cast<uint32_t>(produced);
    done += produced;
    if (ret < 0) {
      const char* what = ret == ISAL_INVALID_BLOCK    ? "invalid block"
                         : ret == ISAL_INVALID_SYMBOL ? "invalid symbol"
                         : ret == ISAL_INVALID_LOOKBACK ? "invalid distance too far back"
                                                        : "invalid stream";
      throw Error(path_ + ": corrupt gzip data (" + what + ")");
    }
    if (state.block_state == ISAL_BLOCK_FINISH) {
      PutBackOverread();
      CheckMemberTrailer();
      if (!StartNextMember()) stream_done_ = true;
    } else if (produced == 0 && avail_in_ == 0 && input_done_) {
      break;  // the file ends inside the stream: the caller reports the truncation
    }
  }
  return done;
}

void ByteSource::Skip(int64_t n) {
  std::vector<unsigned char> scratch(static_cast<size_t>(std::min<int64_t>(n, 1 << 16)));
  while (n > 0) {
    const size_t want = static_cast<size_t>(std::min<int64_t>(n, int64_t(scratch.size())));
    const size_t got = Read(scratch.data(), want);
    if (got < want) throw Error(path_ + ": file ends inside the header");
    n -= static_cast<int64_t>(got);
  }
}

void ByteSource::CheckToEnd() {
  if (!compressed_) return;
  unsigned char scratch[1 << 14];
  while (!stream_done_) {
    const size_t got = Read(scratch, sizeof scratch);
    if (got == 0 && !stream_done_) {
      throw Error(path_ + ": file ends before the end of its gzip stream (truncated)");
    }
  }
}

}  // namespace boldsum
