// Internal: advice to the kernel about large buffers.
#pragma once

#include <Eigen/Core>
#include <cstddef>

namespace boldsum {

// Asks for transparent huge pages on the whole 2 MiB pages inside a buffer of `bytes`
// bytes at `data`, before it is first touched: filling 50 MB then costs ~25 page faults
// instead of ~12,800 (measured: 9 ms instead of 145 ms on a 2-core virtual machine whose
// kernel grants huge pages on request, "madvise" mode). Only advice: the kernel may
// ignore it, and nothing changes but speed.
void AdviseHugePages(void* data, size_t bytes);

// A rows x cols matrix set to `value`, its storage advised as above before it is filled.
Eigen::MatrixXd FilledMatrix(Eigen::Index rows, Eigen::Index cols, double value);

}  // namespace boldsum
