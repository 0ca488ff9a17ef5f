// ReadFileBytes: every byte of a file (NULs, sizes around the read buffer), files whose
// size the kernel reports as 0 (/proc), and errors that name the path.
#include <gtest/gtest.h>

#include <filesystem>
#include <fstream>
#include <string>

#include "boldsum/error.h"
#include "boldsum/io.h"
#include "nifti_files.h"

namespace boldsum {
namespace {

using testing::ErrorOf;
using testing::ScratchDir;

TEST(ReadFileBytes, EveryByte) {
  ScratchDir dir;
  for (size_t size : {size_t{0}, size_t{1}, size_t{65535}, size_t{65536}, size_t{200001}}) {
    std::string bytes(size, '\0');
    for (size_t i = 0; i < size; ++i) bytes[i] = static_cast<char>((i * 7919) % 251);
    const std::string path = dir / ("f" + std::to_string(size));
    std::ofstream(path, std::ios::binary) << bytes;
    EXPECT_EQ(ReadFileBytes(path), bytes) << size;
  }
}

TEST(ReadFileBytes, FileWhoseSizeIsNotKnownAhead) {
  // /proc files report size 0 but have contents.
  const std::string status = ReadFileBytes("/proc/self/status");
  EXPECT_NE(status.find("Name:"), std::string::npos);
}

TEST(ReadFileBytes, ErrorsNameThePath) {
  ScratchDir dir;
  const std::string missing = dir / "missing.txt";
  EXPECT_EQ(ErrorOf([&] { ReadFileBytes(missing); }).find(missing + ": cannot read the file"),
            0u);
  std::filesystem::create_directories(dir / "folder");
  EXPECT_NE(ErrorOf([&] { ReadFileBytes(dir / "folder"); }).find("it is a folder"),
            std::string::npos);
}

}  // namespace
}  // namespace boldsum
