#include <sys/stat.h>

#include <algorithm>
#include <condition_variable>
#include <cstdint>
#include <exception>
#include <mutex>
#include <new>
#include <thread>

#include "boldsum/io.h"
#include "common/huge_pages.h"
#include "io/byte_source.h"
#include "io/nifti_header.h"
#include "io/voxel_convert.h"

namespace boldsum {
namespace {

// Raw volumes decoded per gather pass. The block is column-major (a voxel's volumes are
// adjacent), so a pass writes `tile` floats per column: 16 fill a 64-byte cache line.
// Measured on 96x96x50 float32 volumes into a 32-row block, the decode-then-gather
// pass cost 14.5 ns per value with 1 volume per pass, 4.9 with 8, 3.8 with 16, 3.4 with
// 32; 16 keeps the raw tile at half the memory of 32. At most kTileBytes, at least one.
constexpr int kTileVolumes = 16;
constexpr int64_t kTileBytes = int64_t{64} << 20;

std::string TruncationMessage(const std::string& path, int complete, int total) {
  return path + ": file ends after volume " + std::to_string(complete) + " of " +
         std::to_string(total);
}

}  // namespace

// Double buffering: the reader thread fills slots[(head + filled) % 2] while the caller
// owns nothing of the slots; Next() swaps slots[head] with the caller's matrix, so each
// block is handed over without a copy and the caller's old storage is reused.
struct VolumeStream::Impl {
  std::string path;
  NiftiLayout layout;
  std::vector<int64_t> voxels;
  int block_volumes = 1;
  std::unique_ptr<ByteSource> source;

  std::mutex mutex;
  std::condition_variable changed;
  Eigen::MatrixXf slots[2];
  int head = 0, filled = 0;
  bool finished = false, stop = false;
  std::exception_ptr error;
  std::thread reader;

  void Run();
  void ReadBlock(Eigen::MatrixXf* block, int first_volume, int rows,
                 std::vector<unsigned char>* raw);
};

void VolumeStream::Impl::ReadBlock(Eigen::MatrixXf* block, int first_volume, int rows,
                                   std::vector<unsigned char>* raw) {
  const int64_t volume_bytes = layout.VolumeBytes();
  const int tile = static_cast<int>(std::clamp<int64_t>(
      std::min<int64_t>(kTileVolumes, kTileBytes / std::max<int64_t>(volume_bytes, 1)), 1, rows));
  const float* before = block->data();
  block->resize(rows, static_cast<Eigen::Index>(voxels.size()));
  if (block->data() != before) AdviseHugePages(block->data(), size_t(block->size()) * 4);
  for (int row = 0; row < rows; row += tile) {
    const int count = std::min(tile, rows - row);
    const size_t want = static_cast<size_t>(volume_bytes * count);
    if (raw->capacity() < want) {
      raw->reserve(want);
      AdviseHugePages(raw->data(), want);
    }
    if (raw->size() < want) raw->resize(want);
    const size_t got = source->Read(raw->data(), want);
    if (got < want) {
      const int complete = first_volume + row + static_cast<int>(got / volume_bytes);
      throw Error(TruncationMessage(path, complete, layout.geometry.n_volumes));
    }
    GatherVolumes(layout, raw->data(), count, voxels, block->data(), rows, row);
  }
}

void VolumeStream::Impl::Run() {
  try {
    std::vector<unsigned char> raw;
    const int total = layout.geometry.n_volumes;
    for (int first = 0; first < total; first += block_volumes) {
      int slot;
      {
        std::unique_lock<std::mutex> lock(mutex);
        changed.wait(lock, [&] { return stop || filled < 2; });
        if (stop) return;
        slot = (head + filled) % 2;
      }
      const int rows = std::min(block_volumes, total - first);
      ReadBlock(&slots[slot], first, rows, &raw);
      // The last block is handed over only after the gzip checksum has been verified.
      if (first + rows == total) source->CheckToEnd();
      std::lock_guard<std::mutex> lock(mutex);
      ++filled;
      changed.notify_all();
    }
  } catch (const Error&) {
    std::lock_guard<std::mutex> lock(mutex);
    error = std::current_exception();
  } catch (const std::bad_alloc&) {
    std::lock_guard<std::mutex> lock(mutex);
    error = std::make_exception_ptr(Error(path + ": out of memory while reading"));
  } catch (const std::exception& e) {
    std::lock_guard<std::mutex> lock(mutex);
    error = std::make_exception_ptr(Error(path + ": " + e.what()));
  }
  std::lock_guard<std::mutex> lock(mutex);
  finished = true;
  changed.notify_all();
}

VolumeStream::VolumeStream(const std::string& path, std::vector<int64_t> voxels, int block_volumes)
    : impl_(new Impl) {
  Impl& s = *impl_;
  s.path = path;
  s.layout = ReadNiftiLayout(path);
  if (block_volumes < 1) {
    throw Error(path + ": block_volumes = " + std::to_string(block_volumes) +
                " (must be at least 1)");
  }
  s.block_volumes = block_volumes;
  const int64_t n_voxels = s.layout.geometry.n_voxels();
  for (size_t j = 0; j < voxels.size(); ++j) {
    if (voxels[j] < 0 || voxels[j] >= n_voxels || (j > 0 && voxels[j] <= voxels[j - 1])) {
      throw Error(path + ": voxel index " + std::to_string(voxels[j]) + " at position " +
                  std::to_string(j) + " is out of range or not increasing (the image has " +
                  std::to_string(n_voxels) + " voxels)");
    }
  }
  s.voxels = std::move(voxels);
  s.source = std::make_unique<ByteSource>(s.layout.data_path, s.layout.data_offset);
  if (!s.source->IsCompressed()) {
    // An uncompressed file's length tells at once whether every volume is there.
    struct stat info;
    if (::stat(s.layout.data_path.c_str(), &info) == 0) {
      const int64_t data_bytes = static_cast<int64_t>(info.st_size) - s.layout.data_offset;
      const int complete = static_cast<int>(std::max<int64_t>(data_bytes, 0) /
                                            std::max<int64_t>(s.layout.VolumeBytes(), 1));
      if (complete < s.layout.geometry.n_volumes) {
        throw Error(TruncationMessage(path, complete, s.layout.geometry.n_volumes));
      }
    }
  }
  s.reader = std::thread([&s] { s.Run(); });
}

VolumeStream::~VolumeStream() {
  {
    std::lock_guard<std::mutex> lock(impl_->mutex);
    impl_->stop = true;
  }
  impl_->changed.notify_all();
  if (impl_->reader.joinable()) impl_->reader.join();
}

const ImageGeometry& VolumeStream::geometry() const { return impl_->layout.geometry; }

bool VolumeStream::Next(Eigen::MatrixXf* block) {
  Impl& s = *impl_;
  std::unique_lock<std::mutex> lock(s.mutex);
  s.changed.wait(lock, [&] { return s.filled > 0 || s.finished; });
  if (s.filled > 0) {
    block->swap(s.slots[s.head]);
    s.head = (s.head + 1) % 2;
    --s.filled;
    s.changed.notify_all();
    return true;
  }
  if (s.error) std::rethrow_exception(s.error);
  return false;
}

}  // namespace boldsum
