#include "pool/pool_outputs.h"

#include <algorithm>
#include <cmath>
#include <filesystem>
#include <limits>

#include "boldsum/io.h"

namespace boldsum {
namespace {

namespace fs = std::filesystem;

// Shortest round-trip decimal, or n/a.
std::string Cell(double value) { return std::isfinite(value) ? JsonNumber(value) : "n/a"; }

std::vector<float> Scatter(const Eigen::VectorXd& values, const PoolData& data) {
  std::vector<float> volume(static_cast<size_t>(data.geometry.n_voxels()),
                            std::numeric_limits<float>::quiet_NaN());
  for (size_t i = 0; i < data.voxels.size(); ++i) {
    volume[static_cast<size_t>(data.voxels[i])] = static_cast<float>(values[i]);
  }
  return volume;
}

std::string JsonStrings(const std::vector<std::string>& names) {
  std::string text = "[";
  for (size_t i = 0; i < names.size(); ++i) text += (i ? ", " : "") + JsonQuote(names[i]);
  return text + "]";
}

std::string WeightsJson(const GroupContrast& contrast, const GroupDesign& design) {
  std::string rows;
  for (Eigen::Index r = 0; r < contrast.weights.rows(); ++r) {
    std::string row;
    for (Eigen::Index j = 0; j < contrast.weights.cols(); ++j) {
      if (contrast.weights(r, j) == 0) continue;
      row += (row.empty() ? "" : ", ") + JsonQuote(design.columns[j]) + ": " +
             JsonNumber(contrast.weights(r, j));
    }
    rows += (r ? ", {" : "{") + row + "}";
  }
  return contrast.is_f ? "[" + rows + "]" : rows;
}

}  // namespace

PoolContrastSummary SummarizeMaps(const std::string& contrast, const PooledMaps& maps,
                                  PoolMethod method) {
  PoolContrastSummary summary;
  summary.contrast = contrast;
  summary.units = static_cast<int>(maps.n.size());
  std::vector<int> iterations;
  bool first = true;
  for (Eigen::Index v = 0; v < maps.n.size(); ++v) {
    const int n = static_cast<int>(maps.n[v]);
    summary.n_min = first ? n : std::min(summary.n_min, n);
    summary.n_max = first ? n : std::max(summary.n_max, n);
    first = false;
    if (!std::isfinite(maps.tau2[v]) && !std::isfinite(maps.sigma2[v])) continue;
    ++summary.units_valid;
    if (method == PoolMethod::kMixed) {
      if (maps.tau2[v] == 0) ++summary.boundary;
      iterations.push_back(maps.iterations[v]);
    }
    if (!maps.converged[v]) ++summary.not_converged;
  }
  if (!iterations.empty()) {
    std::sort(iterations.begin(), iterations.end());
    summary.iterations_median = iterations[iterations.size() / 2];
    summary.iterations_max = iterations.back();
  }
  return summary;
}

std::vector<std::string> WriteContrastImages(const GroupSpec& spec, const PooledContrast& pooled) {
  const fs::path folder = fs::path(spec.output_dir) / pooled.contrast;
  std::vector<std::pair<std::string, const Eigen::VectorXd*>> maps;
  for (size_t c = 0; c < spec.contrasts.size(); ++c) {
    const GroupContrast& contrast = spec.contrasts[c];
    const PooledContrastMaps& values = pooled.maps.contrasts[c];
    if (contrast.is_f) {
      maps.emplace_back(contrast.name + ".f", &values.stat);
    } else {
      maps.emplace_back(contrast.name + ".estimate", &values.estimate);
      maps.emplace_back(contrast.name + ".variance", &values.variance);
      maps.emplace_back(contrast.name + ".t", &values.stat);
    }
    maps.emplace_back(contrast.name + ".z", &values.z);
  }
  // n is NaN outside the mask like every other map.
  maps.emplace_back("n", &pooled.maps.n);
  if (spec.method == PoolMethod::kOls) {
    maps.emplace_back("sigma2", &pooled.maps.sigma2);
  } else {
    maps.emplace_back("tau2", &pooled.maps.tau2);
  }
  std::vector<std::string> written;
  for (const auto& [name, values] : maps) {
    const std::string path = (folder / (name + ".nii.gz")).string();
    ImageGeometry geometry = pooled.data.geometry;
    geometry.n_volumes = 1;
    WriteImage(path, geometry, Scatter(*values, pooled.data), 1);
    written.push_back(path);
  }
  return written;
}

std::string RegionsTable(const GroupSpec& spec, const std::vector<PooledContrast>& pooled) {
  std::string text =
      "contrast\tgroup_contrast\tregion\tn\ttau2\tsigma2\titerations\testimate\tvariance\tt\tf"
      "\tdof_numerator\tdof\tz\n";
  for (const PooledContrast& one : pooled) {
    const PooledMaps& maps = one.maps;
    for (size_t c = 0; c < spec.contrasts.size(); ++c) {
      const GroupContrast& contrast = spec.contrasts[c];
      const PooledContrastMaps& values = maps.contrasts[c];
      for (size_t r = 0; r < one.data.regions.size(); ++r) {
        const bool valid = std::isfinite(values.dof[r]);
        text += one.contrast + "\t" + contrast.name + "\t" + one.data.regions[r] + "\t" +
                Cell(maps.n[r]) + "\t" + Cell(maps.tau2[r]) + "\t" + Cell(maps.sigma2[r]) +
                "\t" + (valid ? std::to_string(maps.iterations[r]) : "n/a") + "\t" +
                Cell(values.estimate[r]) + "\t" + Cell(values.variance[r]) + "\t" +
                (contrast.is_f ? "n/a" : Cell(values.stat[r])) + "\t" +
                (contrast.is_f ? Cell(values.stat[r]) : "n/a") + "\t" +
                (contrast.is_f && valid ? std::to_string(contrast.weights.rows()) : "n/a") +
                "\t" + Cell(values.dof[r]) + "\t" + Cell(values.z[r]) + "\n";
      }
    }
  }
  return text;
}

std::string PoolSummaryJson(const GroupSpec& spec, const PoolRunOptions& options,
                            const std::vector<PooledContrast>& pooled) {
  const GroupDesign& design = spec.design;
  std::string json = "{\n";
  json += "  \"tool\": \"boldsum\",\n  \"version\": " + JsonQuote(BOLDSUM_VERSION) + ",\n";
  json += "  \"stage\": \"pool\",\n";
  json += "  \"config\": " + JsonQuote(spec.config_path) + ",\n";
  std::string config_sha;
  try {
    config_sha = FileSha256(spec.config_path);
  } catch (const Error&) {
    config_sha = "";
  }
  json += "  \"config_sha256\": " + JsonQuote(config_sha) + ",\n";
  json += "  \"input\": {\"kind\": " +
          JsonQuote(spec.input.kind == PoolInputKind::kImages ? "images" : "regions") +
          ", \"path\": " +
          JsonQuote(spec.input.kind == PoolInputKind::kImages ? spec.input.folder
                                                              : spec.input.table_path) +
          "},\n";
  json += "  \"participants\": " + JsonQuote(spec.participants_path) + ",\n";
  json += "  \"method\": " + JsonQuote(PoolMethodName(spec.method)) + ",\n";
  json += "  \"reml\": {\"relative_tolerance\": " + JsonNumber(options.reml.relative_tolerance) +
          ", \"max_iterations\": " + std::to_string(options.reml.max_iterations) + "},\n";
  json += "  \"subjects\": " + JsonStrings(spec.input.subjects) + ",\n";
  json += "  \"design\": {\n    \"columns\": " + JsonStrings(design.columns) + ",\n";
  json += "    \"intercept\": " + std::string(design.intercept ? "true" : "false") + ",\n";
  json += "    \"covariates\": [";
  for (size_t i = 0; i < design.covariates.size(); ++i) {
    const CovariateSpec& covariate = design.covariates[i];
    json += std::string(i ? ", " : "") + "{\"column\": " + JsonQuote(covariate.column) +
            ", \"centred\": " + (covariate.centre ? "true" : "false") +
            ", \"mean_subtracted\": " + JsonNumber(covariate.mean) + "}";
  }
  json += "],\n    \"factor\": ";
  if (design.factor.column.empty()) {
    json += "null";
  } else {
    json += "{\"column\": " + JsonQuote(design.factor.column) +
            ", \"levels\": " + JsonStrings(design.factor.levels) + ", \"coding\": " +
            JsonQuote(design.factor.coding == FactorCoding::kDifferences ? "differences"
                                                                         : "cell_means") +
            "}";
  }
  json += ",\n    \"matrix\": [";
  for (Eigen::Index i = 0; i < design.z.rows(); ++i) {
    json += i ? ",\n      [" : "\n      [";
    for (Eigen::Index j = 0; j < design.z.cols(); ++j) {
      json += (j ? ", " : "") + JsonNumber(design.z(i, j));
    }
    json += "]";
  }
  json += "]\n  },\n  \"contrasts\": [";
  for (size_t c = 0; c < spec.contrasts.size(); ++c) {
    const GroupContrast& contrast = spec.contrasts[c];
    json += std::string(c ? ",\n" : "\n") + "    {\"name\": " + JsonQuote(contrast.name) +
            ", \"type\": " + (contrast.is_f ? "\"F\"" : "\"t\"") +
            ", \"weights\": " + WeightsJson(contrast, design) + "}";
  }
  json += "\n  ],\n  \"pooled\": [";
  for (size_t i = 0; i < pooled.size(); ++i) {
    const PoolContrastSummary& s = pooled[i].summary;
    json += std::string(i ? ",\n" : "\n") + "    {\"contrast\": " + JsonQuote(s.contrast) +
            ", \"units\": " + std::to_string(s.units) +
            ", \"units_fitted\": " + std::to_string(s.units_valid) +
            ", \"n_min\": " + std::to_string(s.n_min) + ", \"n_max\": " + std::to_string(s.n_max) +
            ", \"tau2_zero\": " + std::to_string(s.boundary) +
            ", \"not_converged\": " + std::to_string(s.not_converged) +
            ", \"reml_iterations_median\": " + std::to_string(s.iterations_median) +
            ", \"reml_iterations_max\": " + std::to_string(s.iterations_max) + "}";
  }
  json += "\n  ]\n}\n";
  return json;
}

}  // namespace boldsum
