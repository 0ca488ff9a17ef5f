// Workflow export text: quoting of ids and paths (spaces, quotes, leading '-'), the
// Snakefile's rules and settings, the SLURM scripts (array size, chunks, throttle,
// dependency) and the errors for unusable settings. The generated files are run for
// real by tests/reference/test_export_snakemake.py and test_export_slurm.py.
#include "study/export_workflow.h"

#include <gtest/gtest.h>
#include <sys/stat.h>
#include <unistd.h>

#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <functional>
#include <sstream>
#include <string>
#include <vector>

#include "boldsum/error.h"

namespace boldsum {
namespace {

namespace fs = std::filesystem;

// Two subjects with ids a shell or a CLI parser could trip on; one run each.
StudySpec SmallStudy(const std::string& root) {
  StudySpec spec;
  spec.config_path = root + "/study.yaml";
  spec.config_dir = root;
  spec.output_dir = root + "/results";
  spec.mask_path = root + "/mask.nii.gz";
  for (const std::string id : {"-01", "sub_A-2"}) {
    SubjectSpec subject;
    subject.id = id;
    RunSpec run;
    run.data_path = root + "/" + id + "/bold.nii.gz";
    run.events_path = root + "/" + id + "/events.tsv";
    subject.runs.push_back(run);
    spec.subjects.push_back(subject);
  }
  return spec;
}

WorkflowOptions Options() {
  WorkflowOptions options;
  options.boldsum_path = "/opt/bold sum/bin/boldsum";
  return options;
}

std::string FileText(const std::vector<WorkflowFile>& files, const std::string& name) {
  for (const WorkflowFile& file : files) {
    if (file.name == name) return file.text;
  }
  ADD_FAILURE() << "no file " << name;
  return "";
}

bool Contains(const std::string& text, const std::string& part) {
  return text.find(part) != std::string::npos;
}

std::string ErrorOf(const std::function<void()>& action) {
  try {
    action();
  } catch (const Error& error) {
    return error.what();
  }
  return "(no error)";
}

TEST(ShellQuoted, LeavesPlainWordsBareAndQuotesEverythingElse) {
  EXPECT_EQ(ShellQuoted("/data/study-1/run_2.nii.gz"), "/data/study-1/run_2.nii.gz");
  EXPECT_EQ(ShellQuoted("-01"), "-01");
  EXPECT_EQ(ShellQuoted(""), "''");
  EXPECT_EQ(ShellQuoted("/my study/a.yaml"), "'/my study/a.yaml'");
  EXPECT_EQ(ShellQuoted("it's"), "'it'\\''s'");
  EXPECT_EQ(ShellQuoted("$HOME `x` \"y\" *"), "'$HOME `x` \"y\" *'");
}

TEST(PythonQuoted, EscapesBackslashQuoteAndControlCharacters) {
  EXPECT_EQ(PythonQuoted("/a b/c.tsv"), "\"/a b/c.tsv\"");
  EXPECT_EQ(PythonQuoted("say \"hi\"\\"), "\"say \\\"hi\\\"\\\\\"");
  EXPECT_EQ(PythonQuoted("a\nb\tc\x01"), "\"a\\nb\\tc\\x01\"");
  EXPECT_EQ(PythonQuoted("mélodie"), "\"mélodie\"");  // UTF-8 passes through
}

TEST(SnakefileText, DeclaresSubjectsInputsRulesAndSettings) {
  WorkflowOptions options = Options();
  options.threads = 6;
  options.memory_mb = 12000;
  options.time_minutes = 90;
  const std::string text = SnakefileText(SmallStudy("/data/my study"), options);
  EXPECT_TRUE(Contains(text, "CONFIG_FILE = \"/data/my study/study.yaml\"\n"));
  EXPECT_TRUE(Contains(text, "OUT = \"/data/my study/results\"\n"));
  EXPECT_TRUE(Contains(text, "os.environ.get(\"BOLDSUM\") or \"/opt/bold sum/bin/boldsum\"\n"));
  // Every input of a subject, the mask included, and nothing of the other subject.
  EXPECT_TRUE(Contains(text, "    \"-01\": [\n"
                             "        \"/data/my study/-01/bold.nii.gz\",\n"
                             "        \"/data/my study/-01/events.tsv\",\n"
                             "        \"/data/my study/mask.nii.gz\",\n"
                             "    ],\n"));
  EXPECT_TRUE(Contains(text, "    \"sub_A-2\": [\n"));
  EXPECT_TRUE(Contains(text, "rule all:\n    input:\n        OUT + \"/pool-ready/subjects.tsv\",\n"
                             "        expand(STAMP, subject=list(SUBJECT_INPUTS)),\n"));
  EXPECT_TRUE(Contains(text, "    threads: 6\n    resources:\n        mem_mb=12000,\n"
                             "        runtime=90,\n"));
  // Quoted by Snakemake at run time; "--subject=" keeps an id like -01 from being read
  // as an option.
  EXPECT_TRUE(Contains(text, "\"{BOLDSUM:q} fit {CONFIG_FILE:q} --subject={wildcards.subject:q} "));
  EXPECT_TRUE(Contains(text, "--threads {threads} --out {OUT:q} --quiet && touch {output:q}\""));
  EXPECT_TRUE(Contains(text, "\"{BOLDSUM:q} gather {CONFIG_FILE:q} --out {OUT:q}\""));
  EXPECT_FALSE(Contains(text, "run:"));  // shell rules only
}

TEST(SnakefileText, OutputFolderOptionReplacesTheConfigs) {
  WorkflowOptions options = Options();
  options.output_dir = "/scratch/out/";
  const std::string text = SnakefileText(SmallStudy("/data"), options);
  EXPECT_TRUE(Contains(text, "OUT = \"/scratch/out\"\n"));
  EXPECT_FALSE(Contains(text, "/data/results"));
}

TEST(SnakefileText, RefusesWhatASnakefileCannotName) {
  StudySpec braces = SmallStudy("/data/{study}");
  EXPECT_TRUE(Contains(ErrorOf([&] { SnakefileText(braces, Options()); }),
                       "'/data/{study}/study.yaml' contains '{' or '}'"));
  StudySpec latin1 = SmallStudy("/data/m\xe9lodie");
  EXPECT_TRUE(Contains(ErrorOf([&] { SnakefileText(latin1, Options()); }),
                       "is not valid UTF-8"));
  StudySpec bad_id = SmallStudy("/data");
  bad_id.subjects[1].id = "a b";
  EXPECT_EQ(ErrorOf([&] { SnakefileText(bad_id, Options()); }),
            "/data/study.yaml: subject id 'a b' may contain only letters, digits, '_' and '-'");
  WorkflowOptions relative = Options();
  relative.boldsum_path = "build/boldsum";
  EXPECT_EQ(ErrorOf([&] { SnakefileText(SmallStudy("/data"), relative); }),
            "workflow option boldsum_path = 'build/boldsum': must be an absolute path to the "
            "boldsum executable");
  WorkflowOptions no_threads = Options();
  no_threads.threads = 0;
  EXPECT_EQ(ErrorOf([&] { SnakefileText(SmallStudy("/data"), no_threads); }),
            "workflow option threads = 0: must be at least 1");
}

TEST(SlurmFolderFiles, ListsSubjectsAndMapsTasksToLines) {
  WorkflowOptions options = Options();
  options.threads = 3;
  options.memory_mb = 2048;
  options.time_minutes = 30;
  options.partition = "short";
  const auto files = SlurmFolderFiles(SmallStudy("/data/my study"), options, "/jobs/it's here/");
  ASSERT_EQ(files.size(), 4u);
  EXPECT_EQ(FileText(files, "subjects.txt"), "-01\nsub_A-2\n");
  const std::string fit = FileText(files, "fit_array.sbatch");
  EXPECT_EQ(fit.rfind("#!/bin/bash\n#SBATCH --array=1-2\n#SBATCH --job-name=boldsum-fit\n"
                      "#SBATCH --cpus-per-task=3\n#SBATCH --mem=2048M\n#SBATCH --time=30\n"
                      "#SBATCH --partition=short\n",
                      0),
            0u);
  EXPECT_FALSE(Contains(fit, "--account"));
  EXPECT_TRUE(Contains(fit, "boldsum='/opt/bold sum/bin/boldsum'\n"));
  EXPECT_TRUE(Contains(fit, "subjects='/jobs/it'\\''s here/subjects.txt'\n"));
  EXPECT_TRUE(Contains(fit, "exec \"$boldsum\" fit '/data/my study/study.yaml' \"--subject=$id\" "
                            "\\\n  --threads \"${SLURM_CPUS_PER_TASK:-1}\" --out "
                            "'/data/my study/results' --quiet\n"));
  const std::string gather = FileText(files, "gather.sbatch");
  EXPECT_TRUE(Contains(gather, "#SBATCH --cpus-per-task=1\n"));
  EXPECT_TRUE(Contains(gather, "exec \"$boldsum\" gather '/data/my study/study.yaml' --out "
                               "'/data/my study/results'\n"));
  const std::string submit = FileText(files, "submit.sh");
  EXPECT_TRUE(Contains(submit, "here='/jobs/it'\\''s here'\n"));
  EXPECT_TRUE(Contains(submit, "reply=$(sbatch --parsable --array=1-2 \\\n"));
  EXPECT_TRUE(Contains(submit, "--dependency=\"afterok$fits\" --kill-on-invalid-dep=yes"));
  EXPECT_FALSE(Contains(submit, "BOLDSUM_ARRAY_OFFSET"));
}

TEST(SlurmFolderFiles, QueuesLargeStudiesAsSeveralThrottledArrays) {
  StudySpec spec = SmallStudy("/data");
  for (int k = 3; k <= 7; ++k) {
    spec.subjects.push_back(spec.subjects[0]);
    spec.subjects.back().id = "s" + std::to_string(k);
  }
  WorkflowOptions options = Options();
  options.array_size = 3;
  options.max_running = 2;
  options.account = "lab.melody-1";
  const auto files = SlurmFolderFiles(spec, options, "/jobs");
  const std::string fit = FileText(files, "fit_array.sbatch");
  EXPECT_TRUE(Contains(fit, "#SBATCH --array=1-3%2\n"));
  EXPECT_TRUE(Contains(fit, "#SBATCH --account=lab.melody-1\n"));
  const std::string submit = FileText(files, "submit.sh");
  // 7 subjects in arrays of 3: lines 1-3, 4-6 (offset 3) and 7 (offset 6).
  EXPECT_TRUE(Contains(submit, "--array=1-3%2 \\\n"));
  EXPECT_TRUE(Contains(submit, "--array=1-3%2 --export=ALL,BOLDSUM_ARRAY_OFFSET=3 \\\n"));
  EXPECT_TRUE(Contains(submit, "--array=1-1%2 --export=ALL,BOLDSUM_ARRAY_OFFSET=6 \\\n"));
  EXPECT_FALSE(Contains(submit, "OFFSET=9"));
}

TEST(SlurmFolderFiles, RefusesNamesAnSbatchLineCannotHold) {
  WorkflowOptions options = Options();
  options.partition = "short; rm";
  EXPECT_EQ(ErrorOf([&] { SlurmFolderFiles(SmallStudy("/data"), options, "/jobs"); }),
            "workflow option partition = 'short; rm': may contain only letters, digits and '_', "
            "'-', '.', ','");
  EXPECT_EQ(ErrorOf([&] { SlurmFolderFiles(SmallStudy("/data"), Options(), "jobs"); }),
            "SLURM folder 'jobs': must be an absolute path");
  StudySpec empty = SmallStudy("/data");
  empty.subjects.clear();
  EXPECT_EQ(ErrorOf([&] { SlurmFolderFiles(empty, Options(), "/jobs"); }),
            "/data/study.yaml: the study has no subjects");
}

TEST(ExportSlurmFolder, WritesExecutableScriptsAndNothingOnError) {
  const char* base = std::getenv("BOLDSUM_TMP");
  const fs::path root = fs::path(base ? base : ::testing::TempDir()) /
                        ("export_workflow_test-" + std::to_string(getpid()));
  fs::remove_all(root);
  const fs::path folder = root / "slurm jobs";
  WorkflowOptions bad = Options();
  bad.memory_mb = 0;
  EXPECT_EQ(ErrorOf([&] { ExportSlurmFolder(SmallStudy("/data"), bad, folder.string()); }),
            "workflow option memory_mb = 0: must be at least 1");
  EXPECT_FALSE(fs::exists(folder));
  ExportSlurmFolder(SmallStudy("/data"), Options(), folder.string());
  for (const char* name : {"fit_array.sbatch", "gather.sbatch", "submit.sh"}) {
    EXPECT_EQ(::access((folder / name).c_str(), X_OK), 0) << name;
  }
  EXPECT_NE(::access((folder / "subjects.txt").c_str(), X_OK), 0);
  const fs::path snakefile = root / "Snakefile";
  ExportSnakefile(SmallStudy("/data"), Options(), snakefile.string());
  std::ifstream in(snakefile);
  std::stringstream text;
  text << in.rdbuf();
  EXPECT_EQ(text.str(), SnakefileText(SmallStudy("/data"), Options()));
  fs::remove_all(root);
}

}  // namespace
}  // namespace boldsum
