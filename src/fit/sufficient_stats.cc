#include "fit/sufficient_stats.h"

#include <algorithm>
#include <string>
#include <vector>

#include "boldsum/error.h"
#include "common/huge_pages.h"
#include "fit/parallel.h"

#if defined(__x86_64__) && defined(__GNUC__)
#include <immintrin.h>
#define BOLDSUM_AVX2_KERNEL 1
#endif

namespace boldsum {
namespace fit {
namespace {

#ifdef BOLDSUM_AVX2_KERNEL

bool CpuHasAvx2Fma() {
  static const bool yes = __builtin_cpu_supports("avx2") && __builtin_cpu_supports("fma");
  return yes;
}

// Voxels per group: each y value is broadcast against K column strips of 4 rows of Z'.
constexpr int kGroup = 4;

// acc(rows i0 .. i0 + 4K, group voxel j) += sum_t zt(i, t) yd(t, j), for the 4K rows of one
// strip. zt: Z' of this block, column t at zt + t * m_pad; yd: t-major, kGroup values per
// volume; acc: m_pad x kGroup, column-major.
template <int K>
__attribute__((target("avx2,fma"))) void Strip(const double* zt, int m_pad, int rows,
                                               const double* yd, int i0, double* acc) {
  __m256d c[K][kGroup];
  for (int k = 0; k < K; ++k) {
    for (int j = 0; j < kGroup; ++j) c[k][j] = _mm256_loadu_pd(acc + j * m_pad + i0 + 4 * k);
  }
  for (int t = 0; t < rows; ++t) {
    const double* zc = zt + static_cast<ptrdiff_t>(t) * m_pad + i0;
    __m256d z[K];
    for (int k = 0; k < K; ++k) z[k] = _mm256_loadu_pd(zc + 4 * k);
    for (int j = 0; j < kGroup; ++j) {
      const __m256d y = _mm256_broadcast_sd(yd + t * kGroup + j);
      for (int k = 0; k < K; ++k) c[k][j] = _mm256_fmadd_pd(z[k], y, c[k][j]);
    }
  }
  for (int k = 0; k < K; ++k) {
    for (int j = 0; j < kGroup; ++j) _mm256_storeu_pd(acc + j * m_pad + i0 + 4 * k, c[k][j]);
  }
}

// One group of up to kGroup voxels (columns `first`.. of the float block, `count` of
// them): converts to double after the offset, forms y'y and y'Dy within the block (four
// voxels per vector), and adds Z'y to g. Voxels absent from a partial group are zeros
// whose results are dropped, so a voxel's arithmetic does not depend on its group.
__attribute__((target("avx2,fma"))) void AccumulateGroup(const float* block, int rows, int count,
                                                         const double* offset, const double* zt,
                                                         int m, int m_pad, double* g, double* yy,
                                                         double* ydy,
                                                         std::vector<double>* yd_buffer,
                                                         std::vector<double>* acc_buffer) {
  double* yd = yd_buffer->data();
  if (count == kGroup) {
    // Four columns at a time: 4 x 4 float tiles transposed into volume-major rows.
    const __m256d off = _mm256_loadu_pd(offset);
    int t = 0;
    for (; t + 4 <= rows; t += 4) {
      __m128 c0 = _mm_loadu_ps(block + t);
      __m128 c1 = _mm_loadu_ps(block + rows + t);
      __m128 c2 = _mm_loadu_ps(block + 2 * static_cast<ptrdiff_t>(rows) + t);
      __m128 c3 = _mm_loadu_ps(block + 3 * static_cast<ptrdiff_t>(rows) + t);
      _MM_TRANSPOSE4_PS(c0, c1, c2, c3);
      _mm256_storeu_pd(yd + t * kGroup, _mm256_sub_pd(_mm256_cvtps_pd(c0), off));
      _mm256_storeu_pd(yd + (t + 1) * kGroup, _mm256_sub_pd(_mm256_cvtps_pd(c1), off));
      _mm256_storeu_pd(yd + (t + 2) * kGroup, _mm256_sub_pd(_mm256_cvtps_pd(c2), off));
      _mm256_storeu_pd(yd + (t + 3) * kGroup, _mm256_sub_pd(_mm256_cvtps_pd(c3), off));
    }
    for (; t < rows; ++t) {
      for (int j = 0; j < kGroup; ++j) {
        yd[t * kGroup + j] =
            static_cast<double>(block[static_cast<ptrdiff_t>(j) * rows + t]) - offset[j];
      }
    }
  } else {
    for (int t = 0; t < rows; ++t) {
      for (int j = 0; j < kGroup; ++j) {
        yd[t * kGroup + j] =
            j < count ? static_cast<double>(block[static_cast<ptrdiff_t>(j) * rows + t]) - offset[j]
                      : 0.0;
      }
    }
  }
  __m256d sum_yy = _mm256_setzero_pd();
  __m256d sum_lag = _mm256_setzero_pd();
  __m256d prev = _mm256_loadu_pd(yd);
  sum_yy = _mm256_mul_pd(prev, prev);
  for (int t = 1; t < rows; ++t) {
    const __m256d y = _mm256_loadu_pd(yd + t * kGroup);
    sum_yy = _mm256_fmadd_pd(y, y, sum_yy);
    sum_lag = _mm256_fmadd_pd(y, prev, sum_lag);
    prev = y;
  }
  alignas(32) double yy_part[kGroup], lag_part[kGroup];
  _mm256_store_pd(yy_part, sum_yy);
  _mm256_store_pd(lag_part, sum_lag);
  for (int j = 0; j < count; ++j) {
    yy[j] += yy_part[j];
    ydy[j] += 2.0 * lag_part[j];
  }

  double* acc = acc_buffer->data();
  for (int j = 0; j < kGroup; ++j) {
    for (int i = 0; i < m_pad; ++i) {
      acc[j * m_pad + i] = j < count && i < m ? g[static_cast<ptrdiff_t>(j) * m + i] : 0.0;
    }
  }
  const int strips = m_pad / 4;
  int i0 = 0;
  for (int s = 0; s + 3 <= strips; s += 3, i0 += 12) Strip<3>(zt, m_pad, rows, yd, i0, acc);
  if (strips % 3 == 2) Strip<2>(zt, m_pad, rows, yd, i0, acc);
  if (strips % 3 == 1) Strip<1>(zt, m_pad, rows, yd, i0, acc);
  for (int j = 0; j < count; ++j) {
    for (int i = 0; i < m; ++i) g[static_cast<ptrdiff_t>(j) * m + i] = acc[j * m_pad + i];
  }
}

#endif  // BOLDSUM_AVX2_KERNEL

}  // namespace

SufficientStats AccumulateStats(const DesignBasis& basis, BlockSource* source, int threads,
                                StatsKernel kernel) {
  const Eigen::Index n_vox = source->n_voxels();
  if (source->n_volumes() != basis.n) {
    throw Error("data has " + std::to_string(source->n_volumes()) + " volumes but the design has " +
                std::to_string(basis.n) + " rows");
  }
  if (n_vox < 1) throw Error("data has no voxels");
  threads = std::max(1, threads - source->BackgroundThreads());
  const Eigen::Index two_r = basis.z.cols();
  SufficientStats s;
  s.g = FilledMatrix(two_r, n_vox, 0.0);
  s.yy = Eigen::VectorXd::Zero(n_vox);
  s.ydy = Eigen::VectorXd::Zero(n_vox);
  s.first = Eigen::VectorXd::Zero(n_vox);
  s.last = Eigen::VectorXd::Zero(n_vox);  // the previous volume while accumulating
  s.offset = Eigen::VectorXd::Zero(n_vox);

#ifdef BOLDSUM_AVX2_KERNEL
  const bool simd = kernel == StatsKernel::kAuto && CpuHasAvx2Fma();
  // Z' padded to whole 4-row strips: column t is row t of Z.
  const int m = static_cast<int>(two_r);
  const int m_pad = (m + 3) / 4 * 4;
  Eigen::MatrixXd zt;
  if (simd) {
    zt = Eigen::MatrixXd::Zero(m_pad, basis.n);
    zt.topRows(m) = basis.z.transpose();
  }
#else
  (void)kernel;
#endif

  Eigen::Index row0 = 0;
  const auto check = [&](Eigen::Index rows, Eigen::Index cols) {
    if (cols != n_vox) {
      throw Error("data block at volume " + std::to_string(row0) + " has " + std::to_string(cols) +
                  " voxels; expected " + std::to_string(n_vox));
    }
    if (row0 + rows > basis.n) {
      throw Error("data has more volumes than the " + std::to_string(basis.n) + " it declares");
    }
  };
  // First and last values of the block: the offset, y_0, and the lag-1 term across the
  // boundary with the previous block.
  const auto ends = [&](const auto& block, Eigen::Index v0, Eigen::Index w, bool is_first) {
    const Eigen::Index rows = block.rows();
    for (Eigen::Index v = v0; v < v0 + w; ++v) {
      const double y0 = static_cast<double>(block(0, v)) - s.offset(v);
      if (is_first) {
        s.first(v) = y0;
      } else {
        s.ydy(v) += 2.0 * s.last(v) * y0;
      }
      s.last(v) = static_cast<double>(block(rows - 1, v)) - s.offset(v);
    }
  };
  // One block of volumes, float (images) or double (ROI tables).
  const auto accumulate = [&](const auto& block) {
    const Eigen::Index rows = block.rows();
    check(rows, block.cols());
    if (rows == 0) return;
    const bool is_first = row0 == 0;
    ForEachChunk(n_vox, threads, [&](Eigen::Index v0, Eigen::Index v1) {
      const Eigen::Index w = v1 - v0;
      if (is_first && basis.has_constant) {
        s.offset.segment(v0, w) = block.block(0, v0, 1, w).template cast<double>().transpose();
      }
      Eigen::MatrixXd y = block.middleCols(v0, w).template cast<double>();
      y.rowwise() -= s.offset.segment(v0, w).transpose();
      s.g.middleCols(v0, w).noalias() += basis.z.middleRows(row0, rows).transpose() * y;
      s.yy.segment(v0, w) += y.colwise().squaredNorm().transpose();
      if (rows > 1) {
        s.ydy.segment(v0, w) +=
            2.0 *
            y.topRows(rows - 1).cwiseProduct(y.bottomRows(rows - 1)).colwise().sum().transpose();
      }
      ends(block, v0, w, is_first);
    });
    row0 += rows;
  };
#ifdef BOLDSUM_AVX2_KERNEL
  const auto accumulate_simd = [&](const Eigen::MatrixXf& block) {
    const int rows = static_cast<int>(block.rows());
    check(rows, block.cols());
    if (rows == 0) return;
    const bool is_first = row0 == 0;
    const double* zt_block = zt.data() + row0 * m_pad;
    ForEachChunk(n_vox, threads, [&](Eigen::Index v0, Eigen::Index v1) {
      if (is_first && basis.has_constant) {
        for (Eigen::Index v = v0; v < v1; ++v) s.offset(v) = block(0, v);
      }
      std::vector<double> yd(static_cast<size_t>(rows) * kGroup);
      std::vector<double> acc(static_cast<size_t>(m_pad) * kGroup);
      for (Eigen::Index v = v0; v < v1; v += kGroup) {
        const int count = static_cast<int>(std::min<Eigen::Index>(kGroup, v1 - v));
        AccumulateGroup(block.data() + v * rows, rows, count, s.offset.data() + v, zt_block, m,
                        m_pad, s.g.data() + v * m, s.yy.data() + v, s.ydy.data() + v, &yd, &acc);
      }
      ends(block, v0, v1 - v0, is_first);
    });
    row0 += rows;
  };
#endif
  if (source->ProvidesDoubles()) {
    Eigen::MatrixXd block;
    while (source->NextDouble(&block)) accumulate(block);
  } else {
    Eigen::MatrixXf block;
#ifdef BOLDSUM_AVX2_KERNEL
    if (simd) {
      while (source->Next(&block)) accumulate_simd(block);
    } else {
      while (source->Next(&block)) accumulate(block);
    }
#else
    while (source->Next(&block)) accumulate(block);
#endif
  }
  if (row0 != basis.n) {
    throw Error("data ended after " + std::to_string(row0) + " of " + std::to_string(basis.n) +
                " volumes");
  }
  return s;
}

}  // namespace fit
}  // namespace boldsum
