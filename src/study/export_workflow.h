// A study exported as a workflow for an existing engine, so that many machines share the
// subjects: a Snakefile (one job per subject, then one gather job) or a folder of SLURM
// batch scripts (a job array over the subjects and a gather job that waits for it). Every
// job runs the boldsum executable itself (`fit --subject`, then `gather`), so the outputs
// are byte for byte those of `boldsum fit` on one machine.
#pragma once

#include <string>
#include <vector>

#include "boldsum/config.h"

namespace boldsum {

// Settings of the exported jobs. Each is checked by the functions below, which throw
// Error naming the setting, its value and the rule.
struct WorkflowOptions {
  std::string boldsum_path;  // the executable every job runs; required, absolute
  std::string output_dir;    // the study's output folder; "" means the config's `output`
  int threads = 4;           // threads per subject job; >= 1
  int memory_mb = 8000;      // memory per job in MB (Snakemake mem_mb, SLURM --mem); >= 1
  int time_minutes = 240;    // wall time per job in minutes (Snakemake runtime, --time)
  std::string partition;     // SLURM partition; "" means the cluster's default
  std::string account;       // SLURM account; "" means the user's default
  int max_running = 0;       // SLURM: tasks of each array running at once; 0: no limit
  // SLURM: tasks per submitted array. Array indices must stay below the cluster's
  // MaxArraySize (1001 unless the site changed it, as recalled from the slurm.conf
  // manual), so larger studies are queued as several arrays with an index offset.
  int array_size = 1000;
};

// One file of an exported folder.
struct WorkflowFile {
  std::string name;  // file name inside the folder
  std::string text;
  bool executable = false;
};

// The Snakefile for the study: rule `fit_subject` (wildcard `subject` restricted to the
// study's ids; inputs the config and every file the subject's runs and the mask name;
// output a stamp OUT/<subject>/.workflow-stamp, see the file's comments), rule `gather`
// (inputs every stamp; output OUT/pool-ready/subjects.tsv) and rule `all`. The binary
// is overridable by `--config boldsum=PATH` or the BOLDSUM environment variable.
// Throws Error for invalid options, a subject id outside [A-Za-z0-9_-]+, or a path that
// is not valid UTF-8 (a Snakefile is Python source).
std::string SnakefileText(const StudySpec& spec, const WorkflowOptions& options);

// The SLURM folder for the study, to be written to `folder` (absolute; the scripts name
// their siblings by absolute path because SLURM runs a copy of a batch script):
// subjects.txt (line k = array index k), fit_array.sbatch, gather.sbatch, submit.sh.
// Throws Error as SnakefileText does, and for a partition or account outside
// [A-Za-z0-9_.,-]+ (an #SBATCH line cannot quote).
std::vector<WorkflowFile> SlurmFolderFiles(const StudySpec& spec, const WorkflowOptions& options,
                                           const std::string& folder);

// Write the above: the Snakefile to `path`, the SLURM files into `folder` (created if
// needed, existing files of the same names replaced). Everything is generated and
// checked before the first file is written; each file is written atomically.
void ExportSnakefile(const StudySpec& spec, const WorkflowOptions& options,
                     const std::string& path);
void ExportSlurmFolder(const StudySpec& spec, const WorkflowOptions& options,
                       const std::string& folder);

// Quoting used in the generated files, exposed for tests. ShellQuoted gives one bash
// word with exactly the bytes of `text`; PythonQuoted a Python 3 string literal.
std::string ShellQuoted(const std::string& text);
std::string PythonQuoted(const std::string& text);

}  // namespace boldsum
