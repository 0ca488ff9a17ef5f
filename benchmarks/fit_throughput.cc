// fit_throughput: voxels per second of the first-level fit (FitRun, then EstimateContrasts
// for all contrasts and TestContrast for each) on data already in memory. Driven by
// fit_benchmark.py, which also runs the numpy reference on a subset of the same voxels.
//
// Usage:
//   fit_throughput --data BOLD.nii[.gz] --mask MASK.nii[.gz] --design design.tsv
//                  --contrasts contrasts.tsv [--threads 1,2] [--repeat R]
//                  [--dump-every K --dump DIR]
// design.tsv: a header of column names, one row per volume (as `boldsum fit` writes it).
// contrasts.tsv: one contrast per line, tab-separated: name, t or F, q, then the q x p
// weights row by row.
// Output: one JSON object on stdout with the sizes, the load time (VolumeStream alone:
// inflate and gather the in-mask voxels, blocks of 32 volumes kept) and, per thread count, the
// best wall time of FitRun and of the contrast step over R repeats (data stays in memory).
// With --dump, every K-th in-mask voxel (0, K, 2K, ...) is written to DIR as raw
// little-endian arrays, voxel-major: y.f32 (N per voxel, the values FitRun saw),
// beta.f64 (p), sigma2.f64, rho.f64, valid.u8, and per contrast <name>.effect.f64 (q),
// <name>.cov.f64 (q*q, column-major), <name>.stat.f64, <name>.z.f64.
#include <algorithm>
#include <chrono>
#include <cstdint>
#include <cstdio>
#include <fstream>
#include <iostream>
#include <sstream>
#include <string>
#include <vector>

#include "boldsum/error.h"
#include "boldsum/fit.h"
#include "boldsum/io.h"

namespace {

using Clock = std::chrono::steady_clock;

double Seconds(Clock::time_point since) {
  return std::chrono::duration<double>(Clock::now() - since).count();
}

// A run held in memory as the blocks of volumes VolumeStream produced, handed out again
// block by block (copied, as a stream hands out fresh blocks).
class BlocksSource : public boldsum::BlockSource {
 public:
  BlocksSource(const std::vector<Eigen::MatrixXf>& blocks, int volumes)
      : blocks_(blocks), volumes_(volumes) {}
  int n_volumes() const override { return volumes_; }
  int n_voxels() const override { return static_cast<int>(blocks_.front().cols()); }
  bool Next(Eigen::MatrixXf* block) override {
    if (next_ >= blocks_.size()) return false;
    *block = blocks_[next_++];
    return true;
  }

 private:
  const std::vector<Eigen::MatrixXf>& blocks_;
  int volumes_;
  size_t next_ = 0;
};

struct Contrast {
  std::string name;
  bool is_f = false;
  Eigen::MatrixXd weights;  // q x p
};

std::vector<Contrast> ReadContrasts(const std::string& path, Eigen::Index p) {
  std::ifstream in(path);
  if (!in) throw boldsum::Error(path + ": cannot open");
  std::vector<Contrast> out;
  std::string line;
  int line_number = 0;
  while (std::getline(in, line)) {
    ++line_number;
    if (line.empty()) continue;
    std::istringstream fields(line);
    Contrast c;
    std::string kind;
    int q = 0;
    fields >> c.name >> kind >> q;
    if (!fields || (kind != "t" && kind != "F") || q < 1) {
      throw boldsum::Error(path + ":" + std::to_string(line_number) +
                           ": expected name, t or F, q >= 1, then q*p weights");
    }
    c.is_f = kind == "F";
    c.weights.resize(q, p);
    for (int i = 0; i < q; ++i) {
      for (Eigen::Index j = 0; j < p; ++j) {
        if (!(fields >> c.weights(i, j))) {
          throw boldsum::Error(path + ":" + std::to_string(line_number) + ": " +
                               std::to_string(q * p) + " weights needed");
        }
      }
    }
    out.push_back(c);
  }
  return out;
}

std::vector<int> ParseList(const std::string& text) {
  std::vector<int> out;
  std::istringstream in(text);
  std::string item;
  while (std::getline(in, item, ',')) out.push_back(std::stoi(item));
  return out;
}

template <typename T>
void WriteRaw(const std::string& path, const std::vector<T>& values) {
  std::ofstream out(path, std::ios::binary);
  out.write(reinterpret_cast<const char*>(values.data()),
            static_cast<std::streamsize>(values.size() * sizeof(T)));
  if (!out) throw boldsum::Error(path + ": cannot write");
}

// Column v of m for every dumped voxel, concatenated.
std::vector<double> Columns(const Eigen::MatrixXd& m, const std::vector<Eigen::Index>& voxels) {
  std::vector<double> out;
  out.reserve(voxels.size() * static_cast<size_t>(m.rows()));
  for (Eigen::Index v : voxels) {
    for (Eigen::Index i = 0; i < m.rows(); ++i) out.push_back(m(i, v));
  }
  return out;
}

std::vector<double> Entries(const Eigen::VectorXd& x, const std::vector<Eigen::Index>& voxels) {
  std::vector<double> out;
  for (Eigen::Index v : voxels) out.push_back(x(v));
  return out;
}

}  // namespace

int main(int argc, char** argv) {
  try {
    std::string data_path, mask_path, design_path, contrasts_path, dump_dir;
    std::vector<int> thread_counts = {1, 2};
    int repeat = 1, dump_every = 0;
    for (int i = 1; i + 1 < argc; i += 2) {
      const std::string flag = argv[i], value = argv[i + 1];
      if (flag == "--data")
        data_path = value;
      else if (flag == "--mask")
        mask_path = value;
      else if (flag == "--design")
        design_path = value;
      else if (flag == "--contrasts")
        contrasts_path = value;
      else if (flag == "--threads")
        thread_counts = ParseList(value);
      else if (flag == "--repeat")
        repeat = std::stoi(value);
      else if (flag == "--dump-every")
        dump_every = std::stoi(value);
      else if (flag == "--dump")
        dump_dir = value;
      else
        throw boldsum::Error("unknown flag " + flag);
    }
    if (data_path.empty() || mask_path.empty() || design_path.empty() || contrasts_path.empty() ||
        repeat < 1) {
      std::cerr << "usage: fit_throughput --data BOLD --mask MASK --design design.tsv "
                   "--contrasts contrasts.tsv [--threads 1,2] [--repeat R] "
                   "[--dump-every K --dump DIR]\n";
      return 2;
    }
    const boldsum::NumericTable design = boldsum::ReadNumericTable(design_path, false);
    const Eigen::MatrixXd& x = design.values;
    const std::vector<Contrast> contrasts = ReadContrasts(contrasts_path, x.cols());

    boldsum::ImageGeometry mask_geometry;
    const std::vector<float> mask = boldsum::ReadVolume(mask_path, &mask_geometry);
    std::vector<int64_t> voxels;
    for (size_t i = 0; i < mask.size(); ++i) {
      if (mask[i] != 0) voxels.push_back(static_cast<int64_t>(i));
    }
    const Eigen::Index n_vox = static_cast<Eigen::Index>(voxels.size());

    // Load: inflate and gather into memory (not part of the timed compute).
    const auto load_start = Clock::now();
    boldsum::VolumeStream stream(data_path, voxels, 32);
    const int n_volumes = stream.geometry().n_volumes;
    if (n_volumes != x.rows()) {
      throw boldsum::Error(data_path + ": " + std::to_string(n_volumes) + " volumes but " +
                           design_path + " has " + std::to_string(x.rows()) + " rows");
    }
    std::vector<Eigen::MatrixXf> blocks;
    for (;;) {
      blocks.emplace_back();
      if (!stream.Next(&blocks.back())) break;
    }
    blocks.pop_back();
    const double load_s = Seconds(load_start);

    std::printf(
        "{\"n_volumes\": %d, \"n_voxels\": %lld, \"p\": %lld, \"load_s\": %.6f, "
        "\"timings\": [",
        n_volumes, static_cast<long long>(n_vox), static_cast<long long>(x.cols()), load_s);
    boldsum::RunFit fit;
    std::vector<Eigen::MatrixXd> weights;
    for (const Contrast& c : contrasts) weights.push_back(c.weights);
    std::vector<boldsum::ContrastEstimate> estimates(contrasts.size());
    std::vector<boldsum::ContrastTest> tests(contrasts.size());
    for (size_t k = 0; k < thread_counts.size(); ++k) {
      boldsum::FitOptions options;
      options.threads = thread_counts[k];
      double best_fit = 1e300, best_contrast = 1e300, test_s = 0;
      for (int r = 0; r < repeat; ++r) {
        const auto fit_start = Clock::now();
        BlocksSource source(blocks, n_volumes);
        fit = boldsum::FitRun(x, &source, options);
        best_fit = std::min(best_fit, Seconds(fit_start));
        const auto contrast_start = Clock::now();
        double testing = 0;
        estimates = boldsum::EstimateContrasts(fit, weights, options);
        const auto test_start = Clock::now();
        for (size_t c = 0; c < contrasts.size(); ++c) {
          tests[c] = boldsum::TestContrast(estimates[c], contrasts[c].is_f, options.threads);
        }
        testing += Seconds(test_start);
        const double contrast = Seconds(contrast_start);
        if (contrast < best_contrast) {
          best_contrast = contrast;
          test_s = testing;
        }
      }
      // contrast_s covers EstimateContrasts and TestContrast; test_s the latter alone.
      std::printf(
          "%s{\"threads\": %d, \"fit_s\": %.6f, \"contrast_s\": %.6f, "
          "\"test_s\": %.6f}",
          k == 0 ? "" : ", ", options.threads, best_fit, best_contrast, test_s);
    }
    const int n_valid = static_cast<int>(std::count(fit.valid.begin(), fit.valid.end(), 1));
    std::printf("], \"n_valid\": %d}\n", n_valid);

    if (!dump_dir.empty() && dump_every > 0) {
      std::vector<Eigen::Index> picked;
      for (Eigen::Index v = 0; v < n_vox; v += dump_every) picked.push_back(v);
      std::vector<float> y;
      y.reserve(picked.size() * static_cast<size_t>(n_volumes));
      for (Eigen::Index v : picked) {
        for (const Eigen::MatrixXf& b : blocks) {
          for (Eigen::Index t = 0; t < b.rows(); ++t) y.push_back(b(t, v));
        }
      }
      WriteRaw(dump_dir + "/y.f32", y);
      WriteRaw(dump_dir + "/beta.f64", Columns(fit.beta, picked));
      WriteRaw(dump_dir + "/sigma2.f64", Entries(fit.sigma2, picked));
      WriteRaw(dump_dir + "/rho.f64", Entries(fit.rho, picked));
      std::vector<unsigned char> valid;
      for (Eigen::Index v : picked) valid.push_back(fit.valid[static_cast<size_t>(v)]);
      WriteRaw(dump_dir + "/valid.u8", valid);
      for (size_t c = 0; c < contrasts.size(); ++c) {
        const std::string stem = dump_dir + "/" + contrasts[c].name;
        WriteRaw(stem + ".effect.f64", Columns(estimates[c].effect, picked));
        WriteRaw(stem + ".cov.f64", Columns(estimates[c].covariance, picked));
        WriteRaw(stem + ".stat.f64", Entries(tests[c].stat, picked));
        WriteRaw(stem + ".z.f64", Entries(tests[c].z, picked));
      }
    }
    return 0;
  } catch (const boldsum::Error& e) {
    std::cerr << "fit_throughput: " << e.what() << "\n";
    return 1;
  }
}
