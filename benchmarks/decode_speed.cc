// Decode throughput of a large float32 .nii.gz, for choosing how VolumeStream inflates.
// Figures are MB/s of uncompressed bytes, by wall time and by CPU time (all threads of
// this process; for `gzip -dc`, the child's). On a busy machine trust the CPU figures.
//
// The file: $BOLDSUM_DECODE_FILE, or else /tmp/boldsum_decode_speed.nii.gz made on the
// first run: 96 x 96 x 50 voxels x 163 volumes = 300 MB of float32, zero outside an
// ellipsoid "brain" (semi-axes 42, 42, 23 voxels: 37% of the grid), inside it baseline
// 1000 plus Gaussian noise of SD 10; gzip level 6.
#include <benchmark/benchmark.h>
#include <libdeflate.h>
#include <sys/resource.h>
#include <sys/stat.h>
#include <zlib.h>

#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <random>
#include <string>
#include <vector>

#include "boldsum/io.h"
#include "io/byte_source.h"

namespace {

double CpuSeconds(int who) {
  struct rusage usage;
  getrusage(who, &usage);
  return usage.ru_utime.tv_sec + usage.ru_stime.tv_sec +
         1e-6 * (usage.ru_utime.tv_usec + usage.ru_stime.tv_usec);
}

std::string MakeFile() {
  const char* given = std::getenv("BOLDSUM_DECODE_FILE");
  if (given != nullptr) return given;
  const std::string path = "/tmp/boldsum_decode_speed.nii.gz";
  struct stat info;
  if (::stat(path.c_str(), &info) == 0) return path;
  boldsum::ImageGeometry g;
  g.dims = {96, 96, 50};
  g.n_volumes = 163;
  g.voxel_mm = {2, 2, 2};
  g.tr_s = 2;
  const std::string raw = "/tmp/boldsum_decode_speed_raw.nii";
  {
    std::mt19937_64 random(7);
    std::normal_distribution<float> noise(1000.0f, 10.0f);
    std::vector<float> values(static_cast<size_t>(g.n_voxels() * g.n_volumes));
    for (int64_t t = 0; t < g.n_volumes; ++t) {
      for (int z = 0; z < 50; ++z) {
        for (int y = 0; y < 96; ++y) {
          for (int x = 0; x < 96; ++x) {
            const double r = std::pow((x - 47.5) / 42, 2) + std::pow((y - 47.5) / 42, 2) +
                             std::pow((z - 24.5) / 23, 2);
            values[static_cast<size_t>(((t * 50 + z) * 96 + y) * 96 + x)] =
                r <= 1 ? noise(random) : 0.0f;
          }
        }
      }
    }
    boldsum::WriteImage(raw, g, values, g.n_volumes);
  }
  // Recompress at level 6 (WriteImage uses level 1).
  const std::string command = "gzip -6 -c " + raw + " > " + path + ".part && mv " + path +
                              ".part " + path + " && rm " + raw;
  if (std::system(command.c_str()) != 0) std::abort();
  return path;
}

const std::string& File() {
  static const std::string path = MakeFile();
  return path;
}

int64_t UncompressedBytes() {
  const boldsum::ImageGeometry g = boldsum::ReadImageGeometry(File());
  return 352 + g.n_voxels() * 4 * g.n_volumes;
}

// Runs `body` once per iteration and reports wall and CPU MB/s of uncompressed data.
template <typename Body>
void Measure(benchmark::State& state, Body&& body, int who = RUSAGE_SELF) {
  const double bytes = static_cast<double>(UncompressedBytes());
  double wall = 0, cpu = 0;
  for (auto _ : state) {
    const double cpu0 = CpuSeconds(who);
    const auto t0 = std::chrono::steady_clock::now();
    body();
    wall += std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
    cpu += CpuSeconds(who) - cpu0;
  }
  const double n = static_cast<double>(state.iterations());
  state.counters["wall_MBps"] = bytes * n / wall / 1e6;
  state.counters["cpu_MBps"] = bytes * n / cpu / 1e6;
}

void BM_GzipCommand(benchmark::State& state) {
  const std::string command = "gzip -dc " + File() + " > /dev/null";
  Measure(state, [&] { benchmark::DoNotOptimize(std::system(command.c_str())); },
          RUSAGE_CHILDREN);
}

void BM_Gzread(benchmark::State& state) {
  std::vector<unsigned char> out(size_t{4} << 20);
  Measure(state, [&] {
    gzFile in = gzopen(File().c_str(), "rb");
    if (state.range(0) > 0) gzbuffer(in, static_cast<unsigned>(state.range(0)));
    while (gzread(in, out.data(), static_cast<unsigned>(out.size())) > 0) {
    }
    gzclose(in);
  });
}

void BM_ByteSource(benchmark::State& state) {
  std::vector<unsigned char> out(size_t{4} << 20);
  Measure(state, [&] {
    boldsum::ByteSource source(File(), 0, static_cast<size_t>(state.range(0)));
    while (source.Read(out.data(), out.size()) > 0) {
    }
  });
}

// Not bounded: the whole compressed file and the whole output in memory at once.
void BM_LibdeflateWhole(benchmark::State& state) {
  std::vector<unsigned char> in, out(static_cast<size_t>(UncompressedBytes()));
  Measure(state, [&] {
    std::FILE* f = std::fopen(File().c_str(), "rb");
    std::fseek(f, 0, SEEK_END);
    in.resize(static_cast<size_t>(std::ftell(f)));
    std::fseek(f, 0, SEEK_SET);
    if (std::fread(in.data(), 1, in.size(), f) != in.size()) std::abort();
    std::fclose(f);
    libdeflate_decompressor* d = libdeflate_alloc_decompressor();
    size_t used = 0, got = 0;
    if (libdeflate_gzip_decompress_ex(d, in.data(), in.size(), out.data(), out.size(), &used,
                                      &got) != LIBDEFLATE_SUCCESS) {
      std::abort();
    }
    libdeflate_free_decompressor(d);
  });
}

// The whole reading path: inflate, convert, gather every `range(1)`th voxel, hand over
// blocks of range(0) volumes; the consumer only sums.
void BM_VolumeStream(benchmark::State& state) {
  const boldsum::ImageGeometry g = boldsum::ReadImageGeometry(File());
  std::vector<int64_t> voxels;
  for (int64_t i = 0; i < g.n_voxels(); i += state.range(1)) voxels.push_back(i);
  double waited = 0;
  Measure(state, [&] {
    boldsum::VolumeStream stream(File(), voxels, static_cast<int>(state.range(0)));
    Eigen::MatrixXf block;
    double sum = 0;
    for (;;) {
      const auto t0 = std::chrono::steady_clock::now();
      const bool more = stream.Next(&block);
      waited += std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
      if (!more) break;
      sum += block.sum();
    }
    benchmark::DoNotOptimize(sum);
  });
  state.counters["waited_s"] = waited / static_cast<double>(state.iterations());
}

BENCHMARK(BM_GzipCommand)->Iterations(2)->Unit(benchmark::kMillisecond)->UseRealTime();
BENCHMARK(BM_Gzread)->Arg(0)->Arg(1 << 20)->Iterations(2)->Unit(benchmark::kMillisecond)
    ->UseRealTime();
BENCHMARK(BM_ByteSource)->Arg(1 << 16)->Arg(1 << 20)->Arg(4 << 20)->Iterations(2)
    ->Unit(benchmark::kMillisecond)->UseRealTime();
BENCHMARK(BM_LibdeflateWhole)->Iterations(2)->Unit(benchmark::kMillisecond)->UseRealTime();
BENCHMARK(BM_VolumeStream)->Args({32, 1})->Args({32, 3})->Args({1, 1})->Iterations(2)
    ->Unit(benchmark::kMillisecond)->UseRealTime();

}  // namespace

BENCHMARK_MAIN();
