// The boldsum command line: parses arguments, calls the library, maps errors to exit
// codes. 0 success; 1 invalid input or a failed run; 2 command-line usage error;
// 3 `check` found a model that cannot be fitted.
#include <CLI/CLI.hpp>

#include <filesystem>
#include <iostream>
#include <optional>

#include "boldsum/config.h"
#include "boldsum/error.h"
#include "boldsum/study.h"
#include "study/demo_study.h"

namespace {

constexpr int kExitInvalidInput = 1;
constexpr int kExitUsage = 2;
constexpr int kExitUnusableModel = 3;

// Loads and validates a config, printing every diagnostic; nullopt when invalid.
std::optional<boldsum::StudySpec> LoadOrReport(const std::string& path) {
  boldsum::LoadedConfig loaded = boldsum::LoadConfig(path);
  for (const boldsum::Diagnostic& d : loaded.diagnostics.all()) std::cerr << d.ToString() << "\n";
  if (loaded.diagnostics.HasErrors()) {
    std::cerr << "boldsum: " << loaded.diagnostics.ErrorCount() << " error(s) in " << path
              << "; nothing was done\n";
    return std::nullopt;
  }
  return loaded.spec;
}

void AddStudyOptions(CLI::App* command, std::string* config, boldsum::StudyOptions* options) {
  command->add_option("config", *config, "study config file (YAML)")->required();
  command->add_option("--subject", options->subjects,
                      "only this subject (repeatable; default: all)");
  command->add_option("--out", options->output_dir,
                      "output folder (default: the config's `output`)");
}

}  // namespace

int main(int argc, char** argv) {
  CLI::App app{"boldsum: first-level task-fMRI GLM with AR(1) prewhitening; writes each "
               "subject's contrast estimates, variances and dof for group analysis"};
  app.set_version_flag("--version", std::string("boldsum ") + BOLDSUM_VERSION);
  app.require_subcommand(1);

  std::string config;
  boldsum::StudyOptions options;
  CLI::App* check = app.add_subcommand(
      "check", "validate a config, build every run's design, write design.tsv/.svg, "
               "report rank, correlations, variance inflation and efficiencies");
  AddStudyOptions(check, &config, &options);

  CLI::App* fit = app.add_subcommand(
      "fit", "fit every run (OLS, AR(1), GLS), combine runs per subject, write outputs");
  AddStudyOptions(fit, &config, &options);
  fit->add_option("--threads", options.threads, "worker threads (default: all cores)")
      ->check(CLI::NonNegativeNumber);

  std::string demo_dir;
  uint64_t seed = 20261202;
  CLI::App* demo = app.add_subcommand(
      "demo", "write a synthetic melody-listening study (images, ROI tables, configs, truth)");
  demo->add_option("dir", demo_dir, "folder to create (must be new or empty)")->required();
  demo->add_option("--seed", seed, "random seed (the study is deterministic in it)");

  CLI::App* compare = app.add_subcommand(
      "demo-compare", "print true versus estimated effects of a fitted demo study");
  compare->add_option("dir", demo_dir, "the demo study folder")->required();

  try {
    app.parse(argc, argv);
  } catch (const CLI::ParseError& error) {
    const int code = app.exit(error);
    return code == 0 ? 0 : kExitUsage;
  }
  if (!options.output_dir.empty()) {
    options.output_dir = std::filesystem::absolute(options.output_dir).lexically_normal().string();
  }

  try {
    if (*demo) {
      boldsum::WriteDemoStudy(demo_dir, seed);
      std::cout << "demo study written to " << demo_dir << "\n";
      return 0;
    }
    if (*compare) {
      boldsum::PrintDemoComparison(demo_dir, std::cout);
      return 0;
    }
    const std::optional<boldsum::StudySpec> spec = LoadOrReport(config);
    if (!spec) return kExitInvalidInput;
    if (*check) {
      return boldsum::CheckStudy(*spec, options, std::cout) ? 0 : kExitUnusableModel;
    }
    boldsum::FitStudy(*spec, options, std::cout);
    return 0;
  } catch (const boldsum::Error& error) {
    std::cerr << "boldsum: " << error.what() << "\n";
    return kExitInvalidInput;
  } catch (const std::exception& error) {
    std::cerr << "boldsum: internal error: " << error.what() << "\n";
    return kExitInvalidInput;
  }
}
