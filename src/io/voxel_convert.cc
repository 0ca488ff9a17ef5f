#include "io/voxel_convert.h"

#include <algorithm>
#include <cstring>
#include <type_traits>

namespace boldsum {
namespace {

template <typename T>
T Load(const unsigned char* p, bool swap) {
  T value;
  if (!swap) {
    std::memcpy(&value, p, sizeof(T));
    return value;
  }
  unsigned char bytes[sizeof(T)];
  for (size_t i = 0; i < sizeof(T); ++i) bytes[i] = p[sizeof(T) - 1 - i];
  std::memcpy(&value, bytes, sizeof(T));
  return value;
}

// One value: exact for unscaled data; otherwise raw * slope + inter in double precision,
// rounded once to float.
template <typename T, bool kSwap, bool kScaled>
struct Converter {
  double slope, inter;
  float operator()(const unsigned char* p) const {
    const T raw = Load<T>(p, kSwap);
    if (kScaled) return static_cast<float>(static_cast<double>(raw) * slope + inter);
    return static_cast<float>(raw);
  }
};

template <typename Convert, typename T>
void ConvertRun(const Convert& convert, const unsigned char* raw, int64_t count, float* out) {
  for (int64_t i = 0; i < count; ++i) out[i] = convert(raw + i * int64_t{sizeof(T)});
}

// A cache-blocked transpose: for a chunk of voxels, each volume is read sequentially
// while the chunk's column segments (kChunk * n_volumes floats) stay in cache, so every
// cache line of `block` is filled in one pass.
template <typename Convert, typename T>
void GatherRun(const Convert& convert, const unsigned char* raw, int n_volumes,
               int64_t volume_bytes, const std::vector<int64_t>& voxels, float* block,
               int64_t rows, int64_t first_row) {
  constexpr int64_t kChunk = 256;
  const int64_t n = static_cast<int64_t>(voxels.size());
  for (int64_t start = 0; start < n; start += kChunk) {
    const int64_t end = std::min(n, start + kChunk);
    for (int v = 0; v < n_volumes; ++v) {
      const unsigned char* volume = raw + v * volume_bytes;
      float* dst = block + first_row + v;
      for (int64_t j = start; j < end; ++j) {
        dst[j * rows] = convert(volume + voxels[j] * int64_t{sizeof(T)});
      }
    }
  }
}

template <typename Convert, typename T>
void SumRun(const Convert& convert, const unsigned char* raw, int n_volumes, int64_t n_voxels,
            double* sums) {
  for (int v = 0; v < n_volumes; ++v) {
    const unsigned char* volume = raw + v * n_voxels * int64_t{sizeof(T)};
    for (int64_t i = 0; i < n_voxels; ++i) sums[i] += convert(volume + i * int64_t{sizeof(T)});
  }
}

// Calls `body(converter, T{})` with the converter matching the layout.
template <typename T, typename Body>
void DispatchFlags(const NiftiLayout& layout, Body&& body) {
  const bool scaled = layout.slope != 1.0 || layout.inter != 0.0;
  if (layout.swap_bytes) {
    if (scaled) body(Converter<T, true, true>{layout.slope, layout.inter}, T{});
    else body(Converter<T, true, false>{1.0, 0.0}, T{});
  } else {
    if (scaled) body(Converter<T, false, true>{layout.slope, layout.inter}, T{});
    else body(Converter<T, false, false>{1.0, 0.0}, T{});
  }
}

template <typename Body>
void Dispatch(const NiftiLayout& layout, Body&& body) {
  switch (layout.type) {
    case VoxelType::kUint8: DispatchFlags<uint8_t>(layout, body); break;
    case VoxelType::kInt16: DispatchFlags<int16_t>(layout, body); break;
    case VoxelType::kInt32: DispatchFlags<int32_t>(layout, body); break;
    case VoxelType::kFloat32: DispatchFlags<float>(layout, body); break;
    case VoxelType::kFloat64: DispatchFlags<double>(layout, body); break;
  }
}

}  // namespace

void ConvertValues(const NiftiLayout& layout, const unsigned char* raw, int64_t count,
                   float* out) {
  Dispatch(layout, [&](const auto& convert, auto type) {
    ConvertRun<std::decay_t<decltype(convert)>, decltype(type)>(convert, raw, count, out);
  });
}

void GatherVolumes(const NiftiLayout& layout, const unsigned char* raw, int n_volumes,
                   const std::vector<int64_t>& voxels, float* block, int64_t rows,
                   int64_t first_row) {
  const int64_t volume_bytes = layout.VolumeBytes();
  Dispatch(layout, [&](const auto& convert, auto type) {
    GatherRun<std::decay_t<decltype(convert)>, decltype(type)>(
        convert, raw, n_volumes, volume_bytes, voxels, block, rows, first_row);
  });
}

void SumVolumes(const NiftiLayout& layout, const unsigned char* raw, int n_volumes,
                double* sums) {
  const int64_t n_voxels = layout.geometry.n_voxels();
  Dispatch(layout, [&](const auto& convert, auto type) {
    SumRun<std::decay_t<decltype(convert)>, decltype(type)>(convert, raw, n_volumes, n_voxels,
                                                            sums);
  });
}

}  // namespace boldsum
