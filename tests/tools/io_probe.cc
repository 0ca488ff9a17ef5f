// Exposes boldsum's io functions to the reference scripts (tests/reference/
// test_nifti_io.py) and to manual measurements. Commands:
//   geometry <image>                 header fields, one "name values..." line each
//   read <image> <block> <stride>    geometry, then one line per volume with the values
//                                    of voxels 0, stride, 2*stride, ... (VolumeStream)
//   volume <image>                   geometry, then ReadVolume's values on one line
//   copy <image> <out>               reads every volume, writes them with WriteImage
//   stream <image> <block> <stride>  reads through VolumeStream, prints the sum of the
//                                    values, seconds, seconds waited in Next(), peak RSS
//   sha256 <file>...                 FileSha256 of each file, one per line
//   sha256-text                      Sha256 of each stdin line given in hex
//   json-quote                       JsonQuote of each stdin line given in hex
//   json-number                      JsonNumber of each stdin line: 16 hex digits of a
//                                    double's bits
// Values print with 9 significant digits (enough to round-trip a float), geometry with 17.
#include <sys/resource.h>

#include <chrono>
#include <cstdio>
#include <cstring>
#include <iostream>
#include <string>
#include <vector>

#include "boldsum/io.h"

namespace {

using boldsum::ImageGeometry;

void PrintGeometry(const ImageGeometry& g) {
  std::printf("version %d\n", g.nifti_version);
  std::printf("dims %d %d %d\n", g.dims[0], g.dims[1], g.dims[2]);
  std::printf("n_volumes %d\n", g.n_volumes);
  std::printf("voxel_mm %.17g %.17g %.17g\n", g.voxel_mm[0], g.voxel_mm[1], g.voxel_mm[2]);
  std::printf("tr_s %.17g\n", g.tr_s);
  std::printf("qform_code %d\nsform_code %d\n", g.qform_code, g.sform_code);
  std::printf("quatern %.17g %.17g %.17g\n", g.quatern_b, g.quatern_c, g.quatern_d);
  std::printf("qoffset %.17g %.17g %.17g\n", g.qoffset_x, g.qoffset_y, g.qoffset_z);
  std::printf("qfac %.17g\n", g.qfac);
  for (int r = 0; r < 3; ++r) {
    std::printf("srow%d %.17g %.17g %.17g %.17g\n", r, g.srow[r][0], g.srow[r][1], g.srow[r][2],
                g.srow[r][3]);
  }
}

std::vector<int64_t> EveryNth(int64_t n_voxels, int64_t stride) {
  std::vector<int64_t> voxels;
  for (int64_t i = 0; i < n_voxels; i += stride) voxels.push_back(i);
  return voxels;
}

std::string FromHex(const std::string& hex) {
  std::string bytes;
  for (size_t i = 0; i + 1 < hex.size(); i += 2) {
    bytes += static_cast<char>(std::stoi(hex.substr(i, 2), nullptr, 16));
  }
  return bytes;
}

int Read(const std::string& path, int block_volumes, int64_t stride) {
  const ImageGeometry g = boldsum::ReadImageGeometry(path);
  boldsum::VolumeStream stream(path, EveryNth(g.n_voxels(), stride), block_volumes);
  PrintGeometry(stream.geometry());
  Eigen::MatrixXf block;
  while (stream.Next(&block)) {
    for (Eigen::Index t = 0; t < block.rows(); ++t) {
      std::printf("values");
      for (Eigen::Index j = 0; j < block.cols(); ++j) std::printf(" %.9g", block(t, j));
      std::printf("\n");
    }
  }
  return 0;
}

int Copy(const std::string& path, const std::string& out) {
  const ImageGeometry g = boldsum::ReadImageGeometry(path);
  boldsum::VolumeStream stream(path, EveryNth(g.n_voxels(), 1), 16);
  std::vector<float> values;
  values.reserve(static_cast<size_t>(g.n_voxels() * g.n_volumes));
  Eigen::MatrixXf block;
  while (stream.Next(&block)) {
    for (Eigen::Index t = 0; t < block.rows(); ++t) {
      for (Eigen::Index j = 0; j < block.cols(); ++j) values.push_back(block(t, j));
    }
  }
  boldsum::WriteImage(out, g, values, g.n_volumes);
  return 0;
}

int Stream(const std::string& path, int block_volumes, int64_t stride) {
  using Clock = std::chrono::steady_clock;
  const auto start = Clock::now();
  const ImageGeometry g = boldsum::ReadImageGeometry(path);
  boldsum::VolumeStream stream(path, EveryNth(g.n_voxels(), stride), block_volumes);
  Eigen::MatrixXf block;
  double sum = 0, waited = 0;
  for (;;) {
    const auto before = Clock::now();
    const bool more = stream.Next(&block);
    waited += std::chrono::duration<double>(Clock::now() - before).count();
    if (!more) break;
    sum += block.cast<double>().sum();
  }
  const double seconds = std::chrono::duration<double>(Clock::now() - start).count();
  struct rusage usage;
  getrusage(RUSAGE_SELF, &usage);
  std::printf("sum %.17g\nseconds %.3f\nwaited %.3f\nuncompressed_MBps %.1f\npeak_rss_MB %.1f\n",
              sum, seconds, waited, g.n_voxels() * 4.0 * g.n_volumes / seconds / 1e6,
              usage.ru_maxrss / 1024.0);
  return 0;
}

int Main(int argc, char** argv) {
  const std::string command = argc > 1 ? argv[1] : "";
  std::string line;
  if (command == "geometry" && argc == 3) {
    PrintGeometry(boldsum::ReadImageGeometry(argv[2]));
    return 0;
  }
  if (command == "read" && argc == 5) return Read(argv[2], std::stoi(argv[3]), std::stoll(argv[4]));
  if (command == "stream" && argc == 5) {
    return Stream(argv[2], std::stoi(argv[3]), std::stoll(argv[4]));
  }
  if (command == "volume" && argc == 3) {
    ImageGeometry g;
    const std::vector<float> values = boldsum::ReadVolume(argv[2], &g);
    PrintGeometry(g);
    std::printf("values");
    for (float v : values) std::printf(" %.9g", v);
    std::printf("\n");
    return 0;
  }
  if (command == "copy" && argc == 4) return Copy(argv[2], argv[3]);
  if (command == "sha256" && argc >= 3) {
    for (int i = 2; i < argc; ++i) std::printf("%s\n", boldsum::FileSha256(argv[i]).c_str());
    return 0;
  }
  if (command == "sha256-text") {
    while (std::getline(std::cin, line)) {
      std::printf("%s\n", boldsum::Sha256(FromHex(line)).c_str());
    }
    return 0;
  }
  if (command == "json-quote") {
    while (std::getline(std::cin, line)) {
      std::printf("%s\n", boldsum::JsonQuote(FromHex(line)).c_str());
    }
    return 0;
  }
  if (command == "json-number") {
    while (std::getline(std::cin, line)) {
      const uint64_t bits = std::stoull(line, nullptr, 16);
      double value;
      std::memcpy(&value, &bits, sizeof value);
      std::printf("%s\n", boldsum::JsonNumber(value).c_str());
    }
    return 0;
  }
  std::fprintf(stderr, "usage: see the comment at the top of io_probe.cc\n");
  return 2;
}

}  // namespace

int main(int argc, char** argv) {
  try {
    return Main(argc, argv);
  } catch (const boldsum::Error& e) {
    std::fprintf(stderr, "error: %s\n", e.what());
    return 1;
  }
}
