// Exposes the design module to tests/reference/test_design_probe.py.
//
//   design_probe MODEL_FILE [tsv|report|warnings|svg]
//
// MODEL_FILE is a plain line format, one setting per line ('#' starts a comment):
//   tr SECONDS                    slice_reference FRACTION        volumes N
//   hrf double_gamma|glover|fir   derivatives none|time|time_dispersion
//   fir BIN_SECONDS BINS          (0 means the default)
//   drift cosine CUTOFF_S | drift polynomial DEGREE | drift none
//   condition NAME                (declares a condition; column order follows)
//   event NAME ONSET DURATION [AMPLITUDE]
//   confounds PATH                confound NAME                    censor COLUMN ABOVE
//   contrast NAME t|f KEY=W ... [| KEY=W ...]    (rows of an F contrast split by '|')
// Output: tsv = DesignToTsv; report = DescribeDesign and contrast weights as lines
// "rank R", "condition_number X", "dependent A B ...", "condition NAME MAXCORR WITH VIF",
// "contrast NAME ESTIMABLE EFFICIENCY", "weights NAME ROW W1 W2 ...", and
// "correlations ROW R1 R2 ..." (ColumnCorrelations, nan for constant columns); warnings = one
// diagnostic per line; svg = DesignToSvg. Errors: message on stderr, exit status 2.
#include <cstdio>
#include <fstream>
#include <iostream>
#include <sstream>
#include <string>
#include <vector>

#include "boldsum/design.h"

namespace {

using boldsum::Error;

double Number(const std::string& text, int line) {
  size_t used = 0;
  double value = 0.0;
  try {
    value = std::stod(text, &used);
  } catch (const std::exception&) {
    used = 0;
  }
  if (used != text.size() || text.empty()) {
    throw Error("model line " + std::to_string(line) + ": not a number: '" + text + "'");
  }
  return value;
}

struct Probe {
  boldsum::ModelSpec model;
  boldsum::RunSpec run;
  std::vector<boldsum::ContrastSpec> contrasts;
  int volumes = 0;
};

Probe ReadModel(const std::string& path) {
  std::ifstream in(path);
  if (!in) throw Error(path + ": cannot open");
  Probe probe;
  probe.run.where = {path, 0, 0};
  std::string text;
  int line = 0;
  while (std::getline(in, text)) {
    ++line;
    const size_t hash = text.find('#');
    if (hash != std::string::npos) text.erase(hash);
    std::istringstream words(text);
    std::vector<std::string> w;
    for (std::string word; words >> word;) w.push_back(word);
    if (w.empty()) continue;
    const std::string& key = w[0];
    auto need = [&](size_t n) {
      if (w.size() < n) throw Error("model line " + std::to_string(line) + ": too few words");
    };
    need(2);
    if (key == "tr") {
      probe.model.tr_s = Number(w[1], line);
    } else if (key == "slice_reference") {
      probe.model.slice_reference = Number(w[1], line);
    } else if (key == "volumes") {
      probe.volumes = static_cast<int>(Number(w[1], line));
    } else if (key == "hrf") {
      probe.model.hrf.shape = w[1] == "glover" ? boldsum::HrfShape::kGlover
                              : w[1] == "fir"  ? boldsum::HrfShape::kFir
                                               : boldsum::HrfShape::kDoubleGamma;
    } else if (key == "derivatives") {
      probe.model.hrf.derivatives = w[1] == "time" ? boldsum::HrfDerivatives::kTime
                                    : w[1] == "time_dispersion"
                                        ? boldsum::HrfDerivatives::kTimeDispersion
                                        : boldsum::HrfDerivatives::kNone;
    } else if (key == "fir") {
      need(3);
      probe.model.hrf.fir_bin_s = Number(w[1], line);
      probe.model.hrf.fir_bins = static_cast<int>(Number(w[2], line));
    } else if (key == "drift") {
      if (w[1] == "cosine") {
        need(3);
        probe.model.drift.kind = boldsum::DriftKind::kCosine;
        probe.model.drift.cutoff_s = Number(w[2], line);
      } else if (w[1] == "polynomial") {
        need(3);
        probe.model.drift.kind = boldsum::DriftKind::kPolynomial;
        probe.model.drift.degree = static_cast<int>(Number(w[2], line));
      } else {
        probe.model.drift.kind = boldsum::DriftKind::kNone;
      }
    } else if (key == "condition") {
      probe.model.conditions.push_back(w[1]);
      probe.run.events[w[1]];
    } else if (key == "event") {
      need(4);
      probe.run.events[w[1]].push_back(
          {Number(w[2], line), Number(w[3], line), w.size() > 4 ? Number(w[4], line) : 1.0});
    } else if (key == "confounds") {
      probe.run.confounds_path = w[1];
    } else if (key == "confound") {
      probe.model.confounds.push_back(w[1]);
    } else if (key == "censor") {
      need(3);
      probe.model.censor = boldsum::CensorSpec{w[1], Number(w[2], line)};
    } else if (key == "contrast") {
      need(4);
      boldsum::ContrastSpec contrast;
      contrast.name = w[1];
      contrast.is_f = w[2] == "f";
      contrast.where = {path, line, 0};
      contrast.rows.emplace_back();
      for (size_t i = 3; i < w.size(); ++i) {
        if (w[i] == "|") {
          contrast.rows.emplace_back();
          continue;
        }
        const size_t equals = w[i].find('=');
        if (equals == std::string::npos)
          throw Error("model line " + std::to_string(line) + ": expected KEY=W");
        contrast.rows.back()[w[i].substr(0, equals)] = Number(w[i].substr(equals + 1), line);
      }
      probe.contrasts.push_back(contrast);
    } else {
      throw Error("model line " + std::to_string(line) + ": unknown setting '" + key + "'");
    }
  }
  return probe;
}

void PrintReport(const Probe& probe, const boldsum::DesignMatrix& design) {
  const boldsum::DesignReport report =
      boldsum::DescribeDesign(design, probe.model, probe.contrasts);
  std::printf("rank %d\n", report.rank);
  std::printf("condition_number %.17g\n", report.condition_number);
  std::printf("dependent");
  for (const std::string& name : report.dependent) std::printf(" %s", name.c_str());
  std::printf("\n");
  for (const auto& c : report.conditions) {
    std::printf("condition %s %.17g %s %.17g\n", c.condition.c_str(), c.max_abs_correlation,
                c.most_correlated_with.empty() ? "-" : c.most_correlated_with.c_str(),
                c.variance_inflation);
  }
  for (const auto& c : report.contrasts) {
    std::printf("contrast %s %d %.17g\n", c.contrast.c_str(), c.estimable ? 1 : 0, c.efficiency);
  }
  for (const boldsum::ContrastSpec& contrast : probe.contrasts) {
    const Eigen::MatrixXd weights = boldsum::ContrastWeights(contrast, design);
    for (Eigen::Index r = 0; r < weights.rows(); ++r) {
      std::printf("weights %s %d", contrast.name.c_str(), static_cast<int>(r));
      for (Eigen::Index c = 0; c < weights.cols(); ++c) std::printf(" %.17g", weights(r, c));
      std::printf("\n");
    }
  }
  const Eigen::MatrixXd correlations = boldsum::ColumnCorrelations(design);
  for (Eigen::Index r = 0; r < correlations.rows(); ++r) {
    std::printf("correlations %d", static_cast<int>(r));
    for (Eigen::Index c = 0; c < correlations.cols(); ++c) {
      std::printf(" %.17g", correlations(r, c));
    }
    std::printf("\n");
  }
}

int Run(int argc, char** argv) {
  if (argc < 2 || argc > 3) throw Error("usage: design_probe MODEL_FILE [tsv|report|warnings|svg]");
  const std::string mode = argc == 3 ? argv[2] : "tsv";
  const Probe probe = ReadModel(argv[1]);
  const boldsum::ConfoundTable confounds = boldsum::LoadConfounds(probe.model, probe.run);
  boldsum::Diagnostics warnings;
  const boldsum::DesignMatrix design =
      boldsum::BuildDesign(probe.model, probe.run, confounds, probe.volumes, &warnings);
  if (mode == "tsv") {
    std::fputs(boldsum::DesignToTsv(design).c_str(), stdout);
  } else if (mode == "report") {
    PrintReport(probe, design);
  } else if (mode == "warnings") {
    for (const boldsum::Diagnostic& d : warnings.all()) std::printf("%s\n", d.ToString().c_str());
  } else if (mode == "svg") {
    std::fputs(boldsum::DesignToSvg(design, "design of " + std::string(argv[1])).c_str(), stdout);
  } else {
    throw Error("unknown mode '" + mode + "'");
  }
  return 0;
}

}  // namespace

int main(int argc, char** argv) {
  try {
    return Run(argc, argv);
  } catch (const std::exception& error) {
    std::cerr << error.what() << "\n";
    return 2;
  }
}
