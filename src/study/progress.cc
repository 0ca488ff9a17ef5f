#include "study/progress.h"

#include <csignal>
#include <cstdio>

namespace boldsum {
namespace {

std::atomic<bool> g_interrupted{false};

extern "C" void OnInterrupt(int) { g_interrupted.store(true); }

std::string Clock(double seconds) {
  const int total = static_cast<int>(seconds + 0.5);
  char text[32];
  std::snprintf(text, sizeof text, "%d:%02d", total / 60, total % 60);
  return text;
}

}  // namespace

bool IsInterrupted() { return g_interrupted.load(); }

void InstallInterruptHandler() {
  std::signal(SIGINT, OnInterrupt);
  std::signal(SIGTERM, OnInterrupt);
}

StudyProgress::StudyProgress(int total_subjects, ProgressMode mode, std::ostream& log)
    : total_(total_subjects), mode_(mode), log_(log), start_(std::chrono::steady_clock::now()) {
  if (mode_ == ProgressMode::kLive) painter_ = std::thread([this] { Refresh(); });
}

StudyProgress::~StudyProgress() {
  {
    std::lock_guard<std::mutex> lock(mutex_);
    stopping_ = true;
  }
  wake_.notify_all();
  if (painter_.joinable()) painter_.join();
  if (mode_ == ProgressMode::kLive) log_ << "\r\033[K" << std::flush;
}

void StudyProgress::Started(const std::string& subject, int64_t total_work) {
  std::lock_guard<std::mutex> lock(mutex_);
  running_[subject] = {0, std::max<int64_t>(total_work, 1)};
}

void StudyProgress::Advanced(const std::string& subject, int64_t work_done) {
  std::lock_guard<std::mutex> lock(mutex_);
  auto it = running_.find(subject);
  if (it != running_.end()) it->second.first = work_done;
}

void StudyProgress::Finished(const std::string& subject) {
  std::lock_guard<std::mutex> lock(mutex_);
  running_.erase(subject);
  ++done_;
}

void StudyProgress::Log(const std::string& line) {
  if (mode_ == ProgressMode::kQuiet) return;
  std::lock_guard<std::mutex> lock(mutex_);
  if (mode_ == ProgressMode::kLive) log_ << "\r\033[K";
  log_ << line << "\n";
  if (mode_ == ProgressMode::kLive) Draw();
  log_ << std::flush;
}

void StudyProgress::Draw() {
  double fraction = done_;
  std::string current;
  for (const auto& [subject, work] : running_) {
    const double part = static_cast<double>(work.first) / static_cast<double>(work.second);
    fraction += part;
    current += " " + subject + " " + std::to_string(static_cast<int>(100 * part)) + "%";
  }
  fraction /= std::max(total_, 1);
  const double elapsed =
      std::chrono::duration<double>(std::chrono::steady_clock::now() - start_).count();
  std::string left = "--:--";
  if (fraction > 0.01) left = Clock(elapsed * (1 - fraction) / fraction);
  log_ << "\r\033[K[" << done_ << "/" << total_ << " subjects]" << current << "  elapsed "
       << Clock(elapsed) << ", left ~" << left << std::flush;
}

void StudyProgress::Refresh() {
  std::unique_lock<std::mutex> lock(mutex_);
  while (!stopping_) {
    Draw();
    wake_.wait_for(lock, std::chrono::milliseconds(250));
  }
}

}  // namespace boldsum
