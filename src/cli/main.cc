// The boldsum command line: parses arguments, calls the library, maps errors to exit
// codes. 0 success; 1 invalid input or a failed run; 2 command-line usage error;
// 3 `check` found a model that cannot be fitted, or `status` found subjects that are
// not up to date; 130 interrupted.
#include <CLI/CLI.hpp>
#include <unistd.h>

#include <filesystem>
#include <iostream>
#include <optional>

#include "boldsum/config.h"
#include "boldsum/error.h"
#include "boldsum/pool.h"
#include "boldsum/report.h"
#include "boldsum/study.h"
#include "study/demo_study.h"
#include "study/export_workflow.h"

namespace {

constexpr int kExitInvalidInput = 1;
constexpr int kExitUsage = 2;
constexpr int kExitUnusableModel = 3;
constexpr int kExitInterrupted = 130;

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

// `export snakemake` and `export slurm`: where to write, the study's output folder and
// the job settings; the SLURM-only settings on `slurm` alone.
struct ExportCommands {
  CLI::App* snakemake = nullptr;
  CLI::App* slurm = nullptr;
  std::string target;
};

void AddExportCommands(CLI::App* app, std::string* config, boldsum::WorkflowOptions* workflow,
                       ExportCommands* commands) {
  CLI::App* exporter = app->add_subcommand(
      "export", "write the study as a workflow for many machines (Snakemake, SLURM)");
  exporter->require_subcommand(1);
  commands->snakemake = exporter->add_subcommand(
      "snakemake", "write a Snakefile: one job per subject, then the gather job");
  commands->slurm = exporter->add_subcommand(
      "slurm", "write a folder with a SLURM job array over the subjects, the gather job and "
               "submit.sh");
  for (CLI::App* command : {commands->snakemake, commands->slurm}) {
    command->add_option("config", *config, "study config file (YAML)")->required();
    command->add_option("-o", commands->target,
                        command == commands->slurm ? "folder to write the scripts to"
                                                   : "Snakefile to write")
        ->required();
    command->add_option("--out", workflow->output_dir,
                        "the study's output folder (default: the config's `output`)");
    command->add_option("--threads", workflow->threads, "threads per subject job (default 4)")
        ->check(CLI::PositiveNumber);
    command->add_option("--mem-mb", workflow->memory_mb, "memory per job in MB (default 8000)")
        ->check(CLI::PositiveNumber);
    command->add_option("--time", workflow->time_minutes,
                        "wall time per job in minutes (default 240)")
        ->check(CLI::PositiveNumber);
  }
  commands->slurm->add_option("--partition", workflow->partition,
                              "SLURM partition (default: the cluster's default)");
  commands->slurm->add_option("--account", workflow->account,
                              "SLURM account (default: your default account)");
  commands->slurm->add_option("--max-running", workflow->max_running,
                              "tasks of each array running at once (default: no limit)")
      ->check(CLI::NonNegativeNumber);
  commands->slurm->add_option("--array-size", workflow->array_size,
                              "tasks per array; larger studies are queued as several arrays "
                              "(default 1000, below SLURM's usual MaxArraySize)")
      ->check(CLI::PositiveNumber);
}

// The absolute path of this executable, which exported jobs run.
std::string ThisExecutable(const char* argv0) {
  std::error_code error;
  const std::filesystem::path self = std::filesystem::read_symlink("/proc/self/exe", error);
  if (!error) return self.string();
  return std::filesystem::absolute(argv0).lexically_normal().string();
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
  fit->add_flag("--force", options.force, "refit every subject, ignoring saved results");
  fit->add_flag("--quiet", options.quiet, "print nothing but errors");
  fit->add_option("--memory", options.memory_gb,
                  "memory budget in GB for subjects fitted at once (default: half of RAM)")
      ->check(CLI::PositiveNumber);
  bool no_report = false;
  fit->add_flag("--no-report", no_report,
                "do not write OUT/report/ at the end (written only when every subject is fitted)");

  boldsum::ReportOptions report_options;
  CLI::App* report = app.add_subcommand(
      "report", "write OUT/report/: an HTML page per subject (design, noise, residual "
                "whiteness, contrast maps) and one for the study");
  report->add_option("config", config, "study config file (YAML)")->required();
  report->add_option("--out", options.output_dir,
                     "output folder (default: the config's `output`)");
  report->add_option("--group", report_options.group_config,
                     "a group config (boldsum pool) whose results to show");
  report->add_option("--threads", report_options.threads,
                     "subjects measured at once (default: all cores)")
      ->check(CLI::NonNegativeNumber);
  report->add_flag("--quiet", report_options.quiet, "print nothing but errors and the path");

  CLI::App* status = app.add_subcommand(
      "status", "list every subject as up to date, stale (and why) or missing");
  AddStudyOptions(status, &config, &options);

  CLI::App* gather = app.add_subcommand(
      "gather", "stack every subject's t-contrast estimates and variances (or ROI rows) into "
                "OUT/pool-ready/ for the group stage");
  gather->add_option("config", config, "study config file (YAML)")->required();
  gather->add_option("--out", options.output_dir,
                     "output folder (default: the config's `output`)");

  std::string demo_dir;
  uint64_t seed = 20261202;
  std::string group_config;
  boldsum::PoolRunOptions pool_options;
  CLI::App* pool = app.add_subcommand(
      "pool", "group stage: pool subjects' estimates and variances (mixed effects, REML)");
  pool->add_option("group_config", group_config, "group model file (YAML)")->required();
  pool->add_option("--threads", pool_options.threads, "worker threads (default: all cores)")
      ->check(CLI::NonNegativeNumber);

  CLI::App* demo = app.add_subcommand(
      "demo", "write a synthetic melody-listening study (images, ROI tables, configs, truth)");
  demo->add_option("dir", demo_dir, "folder to create (must be new or empty)")->required();
  demo->add_option("--seed", seed, "random seed (the study is deterministic in it)");

  CLI::App* compare = app.add_subcommand(
      "demo-compare", "print true versus estimated effects of a fitted demo study");
  compare->add_option("dir", demo_dir, "the demo study folder")->required();

  boldsum::WorkflowOptions workflow;
  ExportCommands exports;
  AddExportCommands(&app, &config, &workflow, &exports);

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
    if (*pool) {
      boldsum::LoadedGroupConfig loaded = boldsum::LoadGroupConfig(group_config);
      for (const boldsum::Diagnostic& d : loaded.diagnostics.all()) std::cerr << d.ToString() << "\n";
      if (loaded.diagnostics.HasErrors()) {
        std::cerr << "boldsum: " << loaded.diagnostics.ErrorCount() << " error(s) in "
                  << group_config << "; nothing was done\n";
        return kExitInvalidInput;
      }
      const boldsum::PoolSummary summary = boldsum::RunPool(loaded.spec, pool_options);
      for (const boldsum::PoolContrastSummary& c : summary.contrasts) {
        std::cout << c.contrast << ": " << c.units_valid << " of " << c.units
                  << " pooled; tau2 = 0 at " << c.boundary << "; REML iterations median "
                  << c.iterations_median << ", max " << c.iterations_max << "\n";
      }
      std::cout << summary.files_written.size() << " files written to "
                << loaded.spec.output_dir << "\n";
      return 0;
    }
    if (*compare) {
      boldsum::PrintDemoComparison(demo_dir, std::cout);
      return 0;
    }
    const std::optional<boldsum::StudySpec> spec = LoadOrReport(config);
    if (!spec) return kExitInvalidInput;
    if (*exports.snakemake || *exports.slurm) {
      workflow.boldsum_path = ThisExecutable(argv[0]);
      if (!workflow.output_dir.empty()) {
        workflow.output_dir = std::filesystem::absolute(workflow.output_dir).string();
      }
      if (*exports.snakemake) {
        boldsum::ExportSnakefile(*spec, workflow, exports.target);
        std::cout << "Snakefile written to " << exports.target << "\n";
      } else {
        boldsum::ExportSlurmFolder(*spec, workflow, exports.target);
        std::cout << "SLURM scripts written to " << exports.target << "/ (queue them with: bash "
                  << exports.target << "/submit.sh)\n";
      }
      return 0;
    }
    if (*check) {
      return boldsum::CheckStudy(*spec, options, std::cout) ? 0 : kExitUnusableModel;
    }
    if (*status) {
      return boldsum::PrintStudyStatus(*spec, options, std::cout) == 0 ? 0 : kExitUnusableModel;
    }
    if (*gather) {
      boldsum::GatherStudy(*spec, options, std::cout);
      return 0;
    }
    report_options.output_dir = options.output_dir;
    if (*report) {
      const boldsum::ReportSummary summary =
          boldsum::WriteStudyReport(*spec, report_options, std::cout);
      std::cout << "report written: " << summary.index_path << "\n";
      return 0;
    }
    options.live_progress = isatty(STDOUT_FILENO) != 0;
    boldsum::InstallInterruptHandler();
    const int brought_up_to_date = boldsum::FitStudy(*spec, options, std::cout);
    // The report covers the whole study, so (like pool-ready/) it follows a fit of every
    // subject only, and only when a subject changed or there is none yet. Its failure
    // leaves the finished fit as it is: a warning, exit 0.
    const std::string index = boldsum::ReportIndexPath(*spec, report_options);
    if (!no_report && options.subjects.empty() && brought_up_to_date == 0 &&
        std::filesystem::exists(index)) {
      if (!options.quiet) std::cout << "report: no subject changed, " << index << " kept\n";
    } else if (!no_report && options.subjects.empty()) {
      report_options.threads = options.threads;
      report_options.quiet = options.quiet;
      try {
        const boldsum::ReportSummary summary =
            boldsum::WriteStudyReport(*spec, report_options, std::cout);
        if (!options.quiet) std::cout << "report written: " << summary.index_path << "\n";
      } catch (const boldsum::Error& error) {
        std::cerr << "boldsum: warning: the fit is complete but the report was not written: "
                  << error.what() << "\n";
        if (boldsum::IsInterrupted()) return kExitInterrupted;
      }
    }
    return 0;
  } catch (const boldsum::Error& error) {
    std::cerr << "boldsum: " << error.what() << "\n";
    return boldsum::IsInterrupted() ? kExitInterrupted : kExitInvalidInput;
  } catch (const std::exception& error) {
    std::cerr << "boldsum: internal error: " << error.what() << "\n";
    return kExitInvalidInput;
  }
}
