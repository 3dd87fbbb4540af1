#include "daemon/log.hpp"

#include <cstdio>
#include <cstdlib>

namespace accrue {

Logger Logger::for_environment(LogLevel threshold) { return Logger(threshold, std::getenv("JOURNAL_STREAM") != nullptr); }

void Logger::log(LogLevel level, std::string_view message) {
  if (int(level) > int(threshold_.load())) return;
  static constexpr const char* names[] = {"", "", "", "error", "warning", "notice", "info", "debug"};
  std::lock_guard lock(mutex_);
  if (journald_) {
    std::fprintf(stderr, "<%d>%.*s\n", int(level), int(message.size()), message.data());
  } else {
    std::fprintf(stderr, "accrued: %s: %.*s\n", names[int(level)], int(message.size()), message.data());
  }
}

bool parse_log_level(std::string_view t, LogLevel& out) {
  if (t == "error") out = LogLevel::error;
  else if (t == "warning") out = LogLevel::warning;
  else if (t == "notice") out = LogLevel::notice;
  else if (t == "info") out = LogLevel::info;
  else if (t == "debug") out = LogLevel::debug;
  else return false;
  return true;
}

}  // namespace accrue
