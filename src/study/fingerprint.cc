#include "study/fingerprint.h"

#include <yaml-cpp/yaml.h>

#include <filesystem>
#include <fstream>
#include <sstream>

#include "boldsum/io.h"

namespace fs = std::filesystem;

namespace boldsum {
namespace {

std::string Exact(double value) {
  char text[40];
  std::snprintf(text, sizeof text, "%.17g", value);
  return text;
}

void AppendModel(const ModelSpec& model, std::ostringstream* text) {
  *text << "tr " << Exact(model.tr_s) << "\nslice_reference " << Exact(model.slice_reference)
        << "\nhrf " << static_cast<int>(model.hrf.shape) << " "
        << static_cast<int>(model.hrf.derivatives) << " " << Exact(model.hrf.fir_bin_s) << " "
        << model.hrf.fir_bins << "\ndrift " << static_cast<int>(model.drift.kind) << " "
        << Exact(model.drift.cutoff_s) << " " << model.drift.degree
        << "\nnoise " << static_cast<int>(model.noise) << "\nconditions";
  for (const std::string& name : model.conditions) *text << " " << name;
  *text << "\nignored";
  for (const std::string& name : model.ignored) *text << " " << name;
  *text << "\nconfounds";
  for (const std::string& name : model.confounds) *text << " " << name;
  *text << "\ncensor";
  if (model.censor) *text << " " << model.censor->column << " " << Exact(model.censor->above);
  *text << "\n";
}

int64_t ModificationTimeNs(const fs::path& path) {
  return static_cast<int64_t>(
      std::chrono::duration_cast<std::chrono::nanoseconds>(
          fs::last_write_time(path).time_since_epoch())
          .count());
}

}  // namespace

ChecksumCache::ChecksumCache(std::string cache_path) : cache_path_(std::move(cache_path)) {
  std::ifstream file(cache_path_);
  std::string line;
  while (std::getline(file, line)) {
    std::istringstream fields(line);
    std::string path;
    Entry entry;
    if (std::getline(fields, path, '\t') && fields >> entry.size >> entry.mtime_ns >> entry.sha256) {
      entries_[path] = entry;
    }
  }
}

std::string ChecksumCache::Sha256Of(const std::string& path) {
  std::error_code ec;
  const auto size = static_cast<int64_t>(fs::file_size(path, ec));
  if (ec) throw Error(path + ": cannot read: " + ec.message());
  const int64_t mtime = ModificationTimeNs(path);
  Entry& entry = entries_[path];
  if (entry.size != size || entry.mtime_ns != mtime || entry.sha256.empty()) {
    entry.sha256 = FileSha256(path);
    entry.size = size;
    entry.mtime_ns = mtime;
  }
  return entry.sha256;
}

void ChecksumCache::Save() const {
  std::string text;
  for (const auto& [path, entry] : entries_) {
    if (entry.sha256.empty() || !fs::exists(path)) continue;
    text += path + "\t" + std::to_string(entry.size) + "\t" + std::to_string(entry.mtime_ns) +
            "\t" + entry.sha256 + "\n";
  }
  fs::create_directories(fs::path(cache_path_).parent_path());
  WriteFileAtomically(cache_path_, text);
}

SubjectFingerprint FingerprintSubject(const StudySpec& spec, const SubjectSpec& subject,
                                      ChecksumCache* checksums) {
  SubjectFingerprint fingerprint;
  std::ostringstream model;
  model << "boldsum " << BOLDSUM_VERSION << "\n";
  AppendModel(spec.model, &model);
  const auto add_input = [&](const std::string& role, const std::string& path) {
    if (path.empty()) {
      model << role << " none\n";
      return;
    }
    const std::string sha = checksums->Sha256Of(path);
    fingerprint.inputs[path] = sha;
    model << role << " " << path << " " << sha << "\n";
  };
  add_input("mask", spec.mask_path);
  for (const RunSpec& run : subject.runs) {
    add_input("run data", run.data_path);
    add_input("run confounds", run.confounds_path);
    if (!run.events_path.empty()) fingerprint.inputs[run.events_path] = checksums->Sha256Of(run.events_path);
    for (const auto& [condition, events] : run.events) {
      model << "events " << condition;
      for (const Event& event : events) {
        model << " " << Exact(event.onset_s) << "/" << Exact(event.duration_s) << "/"
              << Exact(event.amplitude);
      }
      model << "\n";
    }
  }
  fingerprint.model_sha256 = Sha256(model.str());

  std::ostringstream contrasts;
  for (const ContrastSpec& contrast : spec.contrasts) {
    contrasts << contrast.name << (contrast.is_f ? " F" : " t");
    for (const auto& row : contrast.rows) {
      contrasts << " [";
      for (const auto& [key, weight] : row) contrasts << " " << key << "=" << Exact(weight);
      contrasts << " ]";
    }
    contrasts << "\n";
  }
  fingerprint.contrasts_sha256 = Sha256(contrasts.str());
  return fingerprint;
}

RecordedFingerprint ReadRecordedFingerprint(const std::string& summary_json_path) {
  RecordedFingerprint recorded;
  if (!fs::exists(summary_json_path)) return recorded;
  try {
    const YAML::Node summary = YAML::LoadFile(summary_json_path);
    const YAML::Node fingerprint = summary["fingerprint"];
    if (!fingerprint) return recorded;
    recorded.fingerprint.model_sha256 = fingerprint["model_sha256"].as<std::string>();
    recorded.fingerprint.contrasts_sha256 = fingerprint["contrasts_sha256"].as<std::string>();
    for (const YAML::Node& input : fingerprint["inputs"]) {
      recorded.fingerprint.inputs[input["path"].as<std::string>()] =
          input["sha256"].as<std::string>();
    }
    recorded.found = true;
  } catch (const YAML::Exception&) {
    recorded.found = false;
  }
  return recorded;
}

}  // namespace boldsum
