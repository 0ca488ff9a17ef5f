#include "io/byte_source.h"

#include <fcntl.h>
#include <libdeflate.h>
#include <unistd.h>

#include <algorithm>
#include <cerrno>
#include <cstring>
#include <limits>

#include "boldsum/error.h"

namespace boldsum {
namespace {

// inflate takes at most this many bytes per call (its counters are 32-bit).
constexpr size_t kMaxChunk = size_t{1} << 30;

}  // namespace

ByteSource::ByteSource(const std::string& path, int64_t offset, size_t buffer_bytes)
    : path_(path), in_(std::max<size_t>(buffer_bytes, 4096)) {
  fd_ = ::open(path.c_str(), O_RDONLY | O_CLOEXEC);
  if (fd_ < 0) throw Error(path + ": cannot open (" + std::strerror(errno) + ")");
#ifdef POSIX_FADV_SEQUENTIAL
  ::posix_fadvise(fd_, 0, 0, POSIX_FADV_SEQUENTIAL);
#endif
  try {
    Refill();
    compressed_ = zs_.avail_in >= 2 && in_[0] == 0x1f && in_[1] == 0x8b;
    if (compressed_) {
      // -15: raw deflate with a 32 KiB window; the gzip wrapper is read here.
      if (inflateInit2(&zs_, -15) != Z_OK) throw Error(path + ": cannot start zlib");
      zs_ready_ = true;
      zs_.next_in += 2;
      zs_.avail_in -= 2;
      if (!ReadMemberHeader()) stream_done_ = true;  // Read() reports the truncation
    }
    Skip(offset);
  } catch (...) {
    if (zs_ready_) inflateEnd(&zs_);
    ::close(fd_);
    throw;
  }
}

ByteSource::~ByteSource() {
  if (zs_ready_) inflateEnd(&zs_);
  if (fd_ >= 0) ::close(fd_);
}

bool ByteSource::Refill() {
  // Keep unread bytes at the front, then fill the rest of the buffer.
  size_t got = zs_.avail_in;
  if (got > 0 && zs_.next_in != in_.data()) std::memmove(in_.data(), zs_.next_in, got);
  while (got < in_.size() && !input_done_) {
    const ssize_t n = ::read(fd_, in_.data() + got, in_.size() - got);
    if (n < 0) {
      if (errno == EINTR) continue;
      throw Error(path_ + ": read error (" + std::strerror(errno) + ")");
    }
    if (n == 0) input_done_ = true;
    got += static_cast<size_t>(n);
  }
  const bool more = got > zs_.avail_in;
  zs_.next_in = in_.data();
  zs_.avail_in = static_cast<uInt>(got);
  return more;
}

bool ByteSource::TakeByte(unsigned char* byte) {
  if (zs_.avail_in == 0) Refill();
  if (zs_.avail_in == 0) return false;
  *byte = *zs_.next_in++;
  --zs_.avail_in;
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
  crc_ = 0;
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
  if (crc != crc_) throw Error(path_ + ": corrupt gzip data (incorrect data check)");
  if (size != member_bytes_) throw Error(path_ + ": corrupt gzip data (incorrect length check)");
}

bool ByteSource::StartNextMember() {
  if (zs_.avail_in < 2) Refill();
  // Bytes after a member that do not start another one are ignored, as gzip does.
  if (zs_.avail_in < 2 || zs_.next_in[0] != 0x1f || zs_.next_in[1] != 0x8b) return false;
  zs_.next_in += 2;
  zs_.avail_in -= 2;
  if (!ReadMemberHeader()) {
    throw Error(path_ + ": file ends before the end of its gzip stream (truncated)");
  }
  inflateReset(&zs_);
  return true;
}

size_t ByteSource::Read(void* dst, size_t n) {
  unsigned char* out = static_cast<unsigned char*>(dst);
  size_t done = 0;
  if (!compressed_) {
    // Serve what is left in the buffer, then read straight into `dst`.
    const size_t buffered = std::min<size_t>(zs_.avail_in, n);
    if (buffered > 0) {
      std::memcpy(out, zs_.next_in, buffered);
      zs_.next_in += buffered;
      zs_.avail_in -= static_cast<uInt>(buffered);
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
  while (done < n && !stream_done_) {
    if (zs_.avail_in == 0) Refill();
    const size_t want = std::min(n - done, kMaxChunk);
    zs_.next_out = out + done;
    zs_.avail_out = static_cast<uInt>(want);
    const int ret = inflate(&zs_, Z_NO_FLUSH);
    const size_t produced = want - zs_.avail_out;
    crc_ = libdeflate_crc32(crc_, out + done, produced);
    member_bytes_ += static_cast<uint32_t>(produced);
    done += produced;
    if (ret == Z_STREAM_END) {
      CheckMemberTrailer();
      if (!StartNextMember()) stream_done_ = true;
    } else if (ret == Z_DATA_ERROR || ret == Z_NEED_DICT) {
      throw Error(path_ + ": corrupt gzip data (" +
                  std::string(zs_.msg != nullptr ? zs_.msg : "invalid stream") + ")");
    } else if (ret == Z_MEM_ERROR) {
      throw Error(path_ + ": out of memory while inflating");
    } else if (produced == 0 && zs_.avail_in == 0 && input_done_) {
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
