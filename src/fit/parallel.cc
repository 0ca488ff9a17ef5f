#include "fit/parallel.h"

#include <algorithm>
#include <atomic>
#include <exception>
#include <mutex>
#include <thread>
#include <vector>

namespace boldsum {
namespace fit {

void ForEachChunk(Eigen::Index n, int threads,
                  const std::function<void(Eigen::Index, Eigen::Index)>& fn) {
  const Eigen::Index n_chunks = (n + kVoxelChunk - 1) / kVoxelChunk;
  std::atomic<Eigen::Index> next{0};
  std::exception_ptr failure;
  std::mutex failure_mutex;
  auto work = [&]() {
    for (;;) {
      const Eigen::Index chunk = next.fetch_add(1);
      if (chunk >= n_chunks) return;
      try {
        const Eigen::Index begin = chunk * kVoxelChunk;
        fn(begin, std::min(n, begin + kVoxelChunk));
      } catch (...) {
        std::lock_guard<std::mutex> lock(failure_mutex);
        if (!failure) failure = std::current_exception();
        next.store(n_chunks);
        return;
      }
    }
  };
  const Eigen::Index n_threads = std::min<Eigen::Index>(std::max(threads, 1), n_chunks);
  if (n_threads <= 1) {
    work();
  } else {
    std::vector<std::thread> pool;
    pool.reserve(static_cast<size_t>(n_threads - 1));
    for (Eigen::Index t = 1; t < n_threads; ++t) pool.emplace_back(work);
    work();
    for (std::thread& t : pool) t.join();
  }
  if (failure) std::rethrow_exception(failure);
}

}  // namespace fit
}  // namespace boldsum
