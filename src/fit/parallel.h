// Threads over fixed chunks of voxels. The partition into chunks depends only on the
// number of items and the chunk size, never on the thread count, and each chunk is
// processed whole by one thread: so the arithmetic done for an item is the same for any
// thread count, which makes results bitwise identical across --threads values.
#pragma once

#include <Eigen/Core>
#include <functional>

namespace boldsum {
namespace fit {

// Voxels per chunk: wide enough for efficient GEMM panels, small enough that a chunk's
// double-precision scratch (block volumes x chunk) stays in cache.
constexpr Eigen::Index kVoxelChunk = 256;

// Calls fn(begin, end) for each chunk [begin, end) of [0, n), using up to `threads`
// threads (threads >= 1). The first exception thrown by fn is rethrown after all threads
// have stopped.
void ForEachChunk(Eigen::Index n, int threads,
                  const std::function<void(Eigen::Index, Eigen::Index)>& fn);

}  // namespace fit
}  // namespace boldsum
