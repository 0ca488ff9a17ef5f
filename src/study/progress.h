// Progress of a study run and its cancellation. On a terminal a single live line
// (subjects done / total, the running subjects' fractions, elapsed, time left); else
// plain log lines; or nothing. All methods are thread-safe.
#pragma once

#include <atomic>
#include <chrono>
#include <condition_variable>
#include <map>
#include <mutex>
#include <ostream>
#include <string>
#include <thread>

#include "boldsum/study.h"

namespace boldsum {

enum class ProgressMode { kLive, kLines, kQuiet };

class StudyProgress {
 public:
  StudyProgress(int total_subjects, ProgressMode mode, std::ostream& log);
  ~StudyProgress();  // stops the live line
  StudyProgress(const StudyProgress&) = delete;
  StudyProgress& operator=(const StudyProgress&) = delete;

  void Started(const std::string& subject, int64_t total_work);
  void Advanced(const std::string& subject, int64_t work_done);  // cumulative
  void Finished(const std::string& subject);
  // A log line; on a terminal it is printed above the live line. kQuiet drops it.
  void Log(const std::string& line);

 private:
  void Draw();  // requires mutex_
  void Refresh();

  const int total_;
  const ProgressMode mode_;
  std::ostream& log_;
  const std::chrono::steady_clock::time_point start_;
  std::mutex mutex_;
  std::condition_variable wake_;
  bool stopping_ = false;
  int done_ = 0;
  std::map<std::string, std::pair<int64_t, int64_t>> running_;  // done, total
  std::thread painter_;
};

}  // namespace boldsum
