// What a subject's results depend on, as hashes, so that a re-run can tell whether the
// subject is up to date, needs only its contrasts recomputed, or must be refitted.
#pragma once

#include <cstdint>
#include <map>
#include <string>
#include <vector>

#include "boldsum/config.h"

namespace boldsum {

// Checksums of input files, remembered by (path, size, modification time) so that an
// unchanged file is not read again. Kept in OUT/.checksums.tsv, outside the subject
// folders, so that touching an input never changes any subject's outputs.
class ChecksumCache {
 public:
  // Loads the cache file if it exists; a missing or unreadable cache is empty.
  explicit ChecksumCache(std::string cache_path);
  // SHA-256 of the file, from the cache when size and mtime are unchanged.
  std::string Sha256Of(const std::string& path);
  // Writes the cache atomically (entries of files that still exist).
  void Save() const;

 private:
  struct Entry {
    int64_t size = -1;
    int64_t mtime_ns = 0;
    std::string sha256;
  };
  std::string cache_path_;
  std::map<std::string, Entry> entries_;
};

struct SubjectFingerprint {
  // SHA-256 of a canonical text of everything the fit depends on: tool version, the
  // model settings, the mask, every run's data and confounds checksums and its parsed
  // events. Contrasts are not part of it.
  std::string model_sha256;
  // SHA-256 of the contrasts' canonical text (names, types, weights).
  std::string contrasts_sha256;
  // Every input file of the subject and its checksum.
  std::map<std::string, std::string> inputs;
};

SubjectFingerprint FingerprintSubject(const StudySpec& spec, const SubjectSpec& subject,
                                      ChecksumCache* checksums);

// The fingerprint recorded in OUT/<subject>/summary.json; `found` is false when there
// is no readable summary (never fitted, or fitted by an incompatible version).
struct RecordedFingerprint {
  bool found = false;
  SubjectFingerprint fingerprint;
};
RecordedFingerprint ReadRecordedFingerprint(const std::string& summary_json_path);

}  // namespace boldsum
