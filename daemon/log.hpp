#pragma once
// Logger writes one line per message to stderr. Under systemd (JOURNAL_STREAM
// set) each line carries the "<N>" priority prefix journald reads; elsewhere
// plain text with the level name. Thread-safe; no global state: owners pass it.
#include <atomic>
#include <mutex>
#include <string_view>

namespace accrue {

enum class LogLevel { error = 3, warning = 4, notice = 5, info = 6, debug = 7 };

class Logger {
 public:
  Logger(LogLevel threshold, bool journald_prefixes) : threshold_(threshold), journald_(journald_prefixes) {}
  static Logger for_environment(LogLevel threshold);
  void log(LogLevel level, std::string_view message);
  // Config reload may change the threshold while other code logs.
  void set_threshold(LogLevel level) { threshold_.store(level); }
  void error(std::string_view m) { log(LogLevel::error, m); }
  void warning(std::string_view m) { log(LogLevel::warning, m); }
  void notice(std::string_view m) { log(LogLevel::notice, m); }
  void info(std::string_view m) { log(LogLevel::info, m); }
  void debug(std::string_view m) { log(LogLevel::debug, m); }

 private:
  std::atomic<LogLevel> threshold_;
  bool journald_;
  std::mutex mutex_;
};

bool parse_log_level(std::string_view text, LogLevel& out);

}  // namespace accrue
