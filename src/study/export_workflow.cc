#include "study/export_workflow.h"

#include <algorithm>
#include <filesystem>
#include <set>
#include <sstream>

#include "boldsum/error.h"
#include "boldsum/io.h"

namespace fs = std::filesystem;

namespace boldsum {
namespace {

bool IsIdSafe(const std::string& id) {
  return !id.empty() && std::all_of(id.begin(), id.end(), [](char c) {
    return (c >= 'A' && c <= 'Z') || (c >= 'a' && c <= 'z') || (c >= '0' && c <= '9') ||
           c == '_' || c == '-';
  });
}

// Well-formed UTF-8 (RFC 3629: no overlong forms, no surrogates, at most U+10FFFF).
bool IsUtf8(const std::string& text) {
  size_t i = 0;
  while (i < text.size()) {
    const auto byte = static_cast<unsigned char>(text[i]);
    int extra = 0;
    unsigned code = 0;
    if (byte < 0x80) {
      ++i;
      continue;
    } else if ((byte & 0xE0) == 0xC0) {
      extra = 1, code = byte & 0x1F;
    } else if ((byte & 0xF0) == 0xE0) {
      extra = 2, code = byte & 0x0F;
    } else if ((byte & 0xF8) == 0xF0) {
      extra = 3, code = byte & 0x07;
    } else {
      return false;
    }
    if (i + extra >= text.size()) return false;  // the sequence runs past the end
    for (int k = 1; k <= extra; ++k) {
      const auto next = static_cast<unsigned char>(text[i + k]);
      if ((next & 0xC0) != 0x80) return false;
      code = (code << 6) | (next & 0x3F);
    }
    static const unsigned kSmallest[] = {0, 0x80, 0x800, 0x10000};
    if (code < kSmallest[extra] || code > 0x10FFFF || (code >= 0xD800 && code <= 0xDFFF)) {
      return false;
    }
    i += extra + 1;
  }
  return true;
}

bool IsSlurmName(const std::string& name) {
  return std::all_of(name.begin(), name.end(), [](char c) {
    return (c >= 'A' && c <= 'Z') || (c >= 'a' && c <= 'z') || (c >= '0' && c <= '9') ||
           c == '_' || c == '-' || c == '.' || c == ',';
  });
}

void RequireAtLeast(const char* name, int value, int least) {
  if (value < least) {
    throw Error("workflow option " + std::string(name) + " = " + std::to_string(value) +
                ": must be at least " + std::to_string(least));
  }
}

// What every exported job needs, checked once.
struct JobPlan {
  std::string boldsum;  // absolute
  std::string config;   // absolute
  std::string out;      // absolute
  std::vector<std::string> ids;
  std::vector<std::vector<std::string>> inputs;  // per subject, without the config
};

JobPlan PlanJobs(const StudySpec& spec, const WorkflowOptions& options) {
  if (options.boldsum_path.empty() || !fs::path(options.boldsum_path).is_absolute()) {
    throw Error("workflow option boldsum_path = '" + options.boldsum_path +
                "': must be an absolute path to the boldsum executable");
  }
  RequireAtLeast("threads", options.threads, 1);
  RequireAtLeast("memory_mb", options.memory_mb, 1);
  RequireAtLeast("time_minutes", options.time_minutes, 1);
  RequireAtLeast("max_running", options.max_running, 0);
  RequireAtLeast("array_size", options.array_size, 1);
  if (spec.subjects.empty()) throw Error(spec.config_path + ": the study has no subjects");
  JobPlan plan;
  plan.boldsum = options.boldsum_path;
  plan.config = spec.config_path;
  plan.out = options.output_dir.empty() ? spec.output_dir : options.output_dir;
  plan.out = fs::absolute(plan.out).lexically_normal().string();
  while (plan.out.size() > 1 && plan.out.back() == '/') plan.out.pop_back();
  for (const SubjectSpec& subject : spec.subjects) {
    if (!IsIdSafe(subject.id)) {
      throw Error(spec.config_path + ": subject id '" + subject.id +
                  "' may contain only letters, digits, '_' and '-'");
    }
    std::vector<std::string> files;
    std::set<std::string> seen;
    const auto add = [&](const std::string& path) {
      if (!path.empty() && seen.insert(path).second) files.push_back(path);
    };
    for (const RunSpec& run : subject.runs) {
      add(run.data_path);
      add(run.events_path);
      add(run.confounds_path);
    }
    add(spec.mask_path);
    plan.ids.push_back(subject.id);
    plan.inputs.push_back(files);
  }
  return plan;
}

// Every path a Snakefile names must be Python text and free of wildcard braces.
void RequireSnakemakePath(const std::string& what, const std::string& path) {
  if (!IsUtf8(path)) {
    throw Error(what + " '" + path + "' is not valid UTF-8 and cannot be named in a Snakefile "
                "(Python source); rename it or use `boldsum export slurm`");
  }
  if (path.find_first_of("{}") != std::string::npos) {
    throw Error(what + " '" + path + "' contains '{' or '}', which Snakemake reads as a "
                "wildcard; rename it or use `boldsum export slurm`");
  }
}

// The first comment lines of a generated file; control characters in the config's path
// become '?' so that the comment stays one line.
std::string Header(const char* command, const JobPlan& plan) {
  std::string config = plan.config;
  for (char& c : config) {
    if (static_cast<unsigned char>(c) < 0x20 || c == 0x7F) c = '?';
  }
  return std::string("# Written by `boldsum export ") + command + "` (boldsum " +
         BOLDSUM_VERSION + ") from\n#   " + config + "\n";
}

void WriteWorkflowFile(const std::string& path, const WorkflowFile& file) {
  WriteFileAtomically(path, file.text);
  if (file.executable) {
    // Execute permission wherever read permission is granted (the umask still applies).
    const fs::perms now = fs::status(path).permissions();
    fs::perms add = fs::perms::none;
    if ((now & fs::perms::owner_read) != fs::perms::none) add |= fs::perms::owner_exec;
    if ((now & fs::perms::group_read) != fs::perms::none) add |= fs::perms::group_exec;
    if ((now & fs::perms::others_read) != fs::perms::none) add |= fs::perms::others_exec;
    fs::permissions(path, add, fs::perm_options::add);
  }
}

}  // namespace

std::string ShellQuoted(const std::string& text) {
  const bool bare = !text.empty() && std::all_of(text.begin(), text.end(), [](char c) {
    return (c >= 'A' && c <= 'Z') || (c >= 'a' && c <= 'z') || (c >= '0' && c <= '9') ||
           std::string("_-./:=@%+,").find(c) != std::string::npos;
  });
  if (bare) return text;
  std::string quoted = "'";
  for (char c : text) quoted += c == '\'' ? std::string("'\\''") : std::string(1, c);
  return quoted + "'";
}

std::string PythonQuoted(const std::string& text) {
  std::string quoted = "\"";
  for (char c : text) {
    const auto byte = static_cast<unsigned char>(c);
    if (c == '\\' || c == '"') {
      quoted += '\\';
      quoted += c;
    } else if (c == '\n') {
      quoted += "\\n";
    } else if (c == '\t') {
      quoted += "\\t";
    } else if (byte < 0x20 || byte == 0x7F) {
      static const char kHex[] = "0123456789abcdef";
      quoted += "\\x";
      quoted += kHex[byte >> 4];
      quoted += kHex[byte & 0xF];
    } else {
      quoted += c;  // printable ASCII, or part of a UTF-8 sequence (checked by the caller)
    }
  }
  return quoted + "\"";
}

std::string SnakefileText(const StudySpec& spec, const WorkflowOptions& options) {
  const JobPlan plan = PlanJobs(spec, options);
  RequireSnakemakePath("boldsum executable", plan.boldsum);
  RequireSnakemakePath("config", plan.config);
  RequireSnakemakePath("output folder", plan.out);
  for (const auto& files : plan.inputs) {
    for (const std::string& file : files) RequireSnakemakePath("input file", file);
  }
  std::ostringstream s;
  s << Header("snakemake", plan)
    << "# One job per subject (`boldsum fit --subject`), then one gather job that writes\n"
       "# OUT/pool-ready/. Run from any folder (Snakemake keeps its records in ./.snakemake):\n"
       "#   snakemake -j 8 -s THIS_FILE\n"
       "# or hand the jobs to a cluster through a Snakemake profile or executor; every rule\n"
       "# is a plain shell command and declares threads, mem_mb and runtime (minutes).\n"
       "# Another boldsum binary: `--config boldsum=/path/to/boldsum`, or BOLDSUM=/path in\n"
       "# the environment. Per-job settings: --set-threads fit_subject=N,\n"
       "# --set-resources fit_subject:mem_mb=M.\n"
       "import os\nimport re\n\n"
    << "CONFIG_FILE = " << PythonQuoted(plan.config) << "\n"
    << "OUT = " << PythonQuoted(plan.out) << "\n"
    << "# Not a rule parameter: another binary is no reason to rerun a job (boldsum records\n"
       "# its version in each subject's fingerprint and refits when that changes).\n"
    << "BOLDSUM = config.get(\"boldsum\") or os.environ.get(\"BOLDSUM\") or "
    << PythonQuoted(plan.boldsum) << "\n\n"
    << "# Files each subject's fit reads besides the config: its runs' data, events and\n"
       "# confounds files, and the mask.\nSUBJECT_INPUTS = {\n";
  for (size_t i = 0; i < plan.ids.size(); ++i) {
    s << "    " << PythonQuoted(plan.ids[i]) << ": [\n";
    for (const std::string& file : plan.inputs[i]) s << "        " << PythonQuoted(file) << ",\n";
    s << "    ],\n";
  }
  s << "}\n\n"
    << "# The subject jobs' output is a stamp, not summary.json: Snakemake deletes a job's\n"
       "# outputs before running it, and boldsum reads OUT/<subject>/summary.json to tell a\n"
       "# subject that is up to date (skipped, files untouched) or whose contrasts alone\n"
       "# changed (recomputed from the saved fit) from one that needs a full refit. With\n"
       "# summary.json as the output every rerun would refit from the data. The stamp is\n"
       "# touched after boldsum succeeds, so it is newer than every input even when boldsum\n"
       "# skipped the subject. It lies inside the subject's folder and `all` asks for every\n"
       "# stamp, so a subject folder removed by hand is fitted again (Snakemake does not\n"
       "# rerun a job for a missing file that only an up-to-date job reads).\n"
       "STAMP = OUT + \"/{subject}/.workflow-stamp\"\n\n"
       "wildcard_constraints:\n"
       "    subject=\"|\".join(re.escape(s) for s in SUBJECT_INPUTS),\n\n\n"
       "rule all:\n"
       "    input:\n"
       "        OUT + \"/pool-ready/subjects.tsv\",\n"
       "        expand(STAMP, subject=list(SUBJECT_INPUTS)),\n\n\n"
       "rule fit_subject:\n"
       "    input:\n"
       "        config=CONFIG_FILE,\n"
       "        data=lambda wildcards: SUBJECT_INPUTS[wildcards.subject],\n"
       "    output:\n"
       "        STAMP,\n"
    << "    threads: " << options.threads << "\n"
    << "    resources:\n"
    << "        mem_mb=" << options.memory_mb << ",\n"
    << "        runtime=" << options.time_minutes << ",\n"
    << "    shell:\n"
       "        \"{BOLDSUM:q} fit {CONFIG_FILE:q} --subject={wildcards.subject:q} \"\n"
       "        \"--threads {threads} --out {OUT:q} --quiet && touch {output:q}\"\n\n\n"
       "rule gather:\n"
       "    input:\n"
       "        CONFIG_FILE,\n"
       "        expand(STAMP, subject=list(SUBJECT_INPUTS)),\n"
       "    output:\n"
       "        OUT + \"/pool-ready/subjects.tsv\",\n"
       "    threads: 1\n"
       "    resources:\n"
    << "        mem_mb=" << options.memory_mb << ",\n"
    << "        runtime=" << options.time_minutes << ",\n"
    << "    shell:\n"
       "        \"{BOLDSUM:q} gather {CONFIG_FILE:q} --out {OUT:q}\"\n";
  return s.str();
}

std::vector<WorkflowFile> SlurmFolderFiles(const StudySpec& spec, const WorkflowOptions& options,
                                           const std::string& folder) {
  const JobPlan plan = PlanJobs(spec, options);
  if (!fs::path(folder).is_absolute()) {
    throw Error("SLURM folder '" + folder + "': must be an absolute path");
  }
  if (!IsSlurmName(options.partition)) {
    throw Error("workflow option partition = '" + options.partition +
                "': may contain only letters, digits and '_', '-', '.', ','");
  }
  if (!IsSlurmName(options.account)) {
    throw Error("workflow option account = '" + options.account +
                "': may contain only letters, digits and '_', '-', '.', ','");
  }
  std::string dir = fs::path(folder).lexically_normal().string();
  while (dir.size() > 1 && dir.back() == '/') dir.pop_back();
  const int n = static_cast<int>(plan.ids.size());
  const std::string throttle =
      options.max_running > 0 ? "%" + std::to_string(options.max_running) : "";
  const std::string binary = "boldsum=" + ShellQuoted(plan.boldsum) +
                             "\nif [[ -n \"${BOLDSUM:-}\" ]]; then boldsum=$BOLDSUM; fi\n";
  const auto sbatch_lines = [&](const std::string& name, int cpus) {
    std::string lines = "#SBATCH --job-name=" + name + "\n#SBATCH --cpus-per-task=" +
                        std::to_string(cpus) + "\n#SBATCH --mem=" +
                        std::to_string(options.memory_mb) + "M\n#SBATCH --time=" +
                        std::to_string(options.time_minutes) + "\n";
    if (!options.partition.empty()) lines += "#SBATCH --partition=" + options.partition + "\n";
    if (!options.account.empty()) lines += "#SBATCH --account=" + options.account + "\n";
    return lines;
  };

  std::vector<WorkflowFile> files;
  std::string list;
  for (const std::string& id : plan.ids) list += id + "\n";
  files.push_back({"subjects.txt", list, false});

  std::ostringstream fit;
  fit << "#!/bin/bash\n"
      << "#SBATCH --array=1-" << std::min(n, options.array_size) << throttle << "\n"
      << sbatch_lines("boldsum-fit", options.threads)
      << Header("slurm", plan)
      << "# Array task k fits the subject on line BOLDSUM_ARRAY_OFFSET + k of subjects.txt\n"
         "# (the offset is 0 unless submit.sh queues the study as several arrays). Queue it\n"
         "# with submit.sh, which also queues the gather job. Another boldsum binary: set\n"
         "# BOLDSUM when submitting.\n"
         "set -euo pipefail\n\n"
      << binary << "subjects=" << ShellQuoted(dir + "/subjects.txt") << "\n"
      << "task=${SLURM_ARRAY_TASK_ID:?runs as a SLURM array task (submit it with submit.sh)}\n"
         "index=$(( ${BOLDSUM_ARRAY_OFFSET:-0} + task ))\n"
         "id=$(sed -n \"${index}p\" \"$subjects\")\n"
         "if [[ -z $id ]]; then\n"
         "  echo \"fit_array.sbatch: no subject on line $index of $subjects\" >&2\n"
         "  exit 1\n"
         "fi\n"
      << "exec \"$boldsum\" fit " << ShellQuoted(plan.config) << " \"--subject=$id\" \\\n"
      << "  --threads \"${SLURM_CPUS_PER_TASK:-1}\" --out " << ShellQuoted(plan.out)
      << " --quiet\n";
  files.push_back({"fit_array.sbatch", fit.str(), true});

  std::ostringstream gather;
  gather << "#!/bin/bash\n"
         << sbatch_lines("boldsum-gather", 1) << Header("slurm", plan)
         << "# Writes OUT/pool-ready/ from every subject's outputs; submit.sh queues it to\n"
            "# start when every array task has succeeded.\n"
            "set -euo pipefail\n\n"
         << binary << "exec \"$boldsum\" gather " << ShellQuoted(plan.config) << " --out "
         << ShellQuoted(plan.out) << "\n";
  files.push_back({"gather.sbatch", gather.str(), true});

  std::ostringstream submit;
  submit << "#!/bin/bash\n"
         << Header("slurm", plan)
         << "# Queues one array task per subject (fit_array.sbatch) and the gather job\n"
            "# (gather.sbatch), which starts when every task has succeeded (afterok) and is\n"
            "# cancelled if one fails. Arguments are added to every sbatch call, e.g.\n"
            "#   bash submit.sh --qos=short\n"
            "# Logs go to logs/ here. Running it again after a config change is cheap:\n"
            "# boldsum skips the subjects that are already up to date.\n"
            "set -euo pipefail\n\n"
         << "here=" << ShellQuoted(dir) << "\n"
         << "if ! command -v sbatch >/dev/null; then\n"
            "  echo \"submit.sh: sbatch not found; run this where SLURM jobs are submitted\" >&2\n"
            "  exit 1\n"
            "fi\n"
            "mkdir -p \"$here/logs\"\n\n"
            "# The job id in a reply of `sbatch --parsable` (\"id\" or \"id;cluster\").\n"
            "job_id() {\n"
            "  local id=${1%%;*}\n"
            "  if [[ ! $id =~ ^[0-9]+$ ]]; then\n"
            "    echo \"submit.sh: unexpected reply from sbatch: '$1'\" >&2\n"
            "    return 1\n"
            "  fi\n"
            "  printf '%s\\n' \"$id\"\n"
            "}\n\n"
            "fits=\"\"\n";
  for (int offset = 0; offset < n; offset += options.array_size) {
    const int count = std::min(options.array_size, n - offset);
    submit << "reply=$(sbatch --parsable --array=1-" << count << throttle;
    if (offset > 0) submit << " --export=ALL,BOLDSUM_ARRAY_OFFSET=" << offset;
    submit << " \\\n  --output=\"$here/logs/fit-%A_%a.log\" \"$@\" \"$here/fit_array.sbatch\")\n"
           << "fits=$fits:$(job_id \"$reply\")\n";
  }
  submit << "reply=$(sbatch --parsable --dependency=\"afterok$fits\" --kill-on-invalid-dep=yes \\\n"
            "  --output=\"$here/logs/gather-%j.log\" \"$@\" \"$here/gather.sbatch\")\n"
            "gather=$(job_id \"$reply\")\n"
         << "echo \"boldsum: " << n << " subject fit(s) queued as job(s) ${fits#:}; gather job "
            "$gather runs after them\"\n";
  files.push_back({"submit.sh", submit.str(), true});
  return files;
}

void ExportSnakefile(const StudySpec& spec, const WorkflowOptions& options,
                     const std::string& path) {
  const std::string text = SnakefileText(spec, options);
  WriteWorkflowFile(path, {fs::path(path).filename().string(), text, false});
}

void ExportSlurmFolder(const StudySpec& spec, const WorkflowOptions& options,
                       const std::string& folder) {
  const std::string dir = fs::absolute(folder).lexically_normal().string();
  const std::vector<WorkflowFile> files = SlurmFolderFiles(spec, options, dir);
  std::error_code error;
  fs::create_directories(dir, error);
  if (error || !fs::is_directory(dir)) {
    throw Error(dir + ": cannot create the folder (" +
                (error ? error.message() : std::string("a file of that name exists")) + ")");
  }
  for (const WorkflowFile& file : files) WriteWorkflowFile(dir + "/" + file.name, file);
}

}  // namespace boldsum
