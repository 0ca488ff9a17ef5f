// An RGB picture and its PNG encoding (through libpng), for embedding in report pages.
#pragma once

#include <cstdint>
#include <string>
#include <vector>

#include "report/colour_scale.h"

namespace boldsum {

struct RgbImage {
  int width = 0, height = 0;
  std::vector<Rgb> pixels;  // row-major, top row first

  RgbImage() = default;
  RgbImage(int w, int h, Rgb fill = {}) : width(w), height(h), pixels(size_t(w) * h, fill) {}
  Rgb& at(int x, int y) { return pixels[size_t(y) * width + x]; }
  const Rgb& at(int x, int y) const { return pixels[size_t(y) * width + x]; }
};

// The PNG file bytes (8-bit RGB, no interlacing). Throws Error if libpng fails.
std::string EncodePng(const RgbImage& image);

// RFC 4648 base64 with padding.
std::string Base64(const std::string& bytes);

// "data:image/png;base64,..." for an <img> or SVG <image>.
std::string PngDataUri(const RgbImage& image);

}  // namespace boldsum
