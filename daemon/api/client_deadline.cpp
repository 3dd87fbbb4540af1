#include "daemon/api/client_deadline.hpp"

#include <algorithm>

namespace accrue::daemon::api {

ClientDeadline::ClientDeadline(ClientTimeouts timeouts, time_point now) : timeouts_(timeouts), last_activity_(now) {}

void ClientDeadline::received(time_point now, bool ended_a_line, bool line_open) {
  last_activity_ = now;
  if (ended_a_line || !line_open) line_started_.reset();
  // A line begun in this read started at most now; one carried over keeps its start.
  if (line_open && !line_started_) line_started_ = now;
}

void ClientDeadline::wrote(time_point now) { last_activity_ = std::max(last_activity_, now); }

void ClientDeadline::pause_reading(time_point now) {
  if (!paused_at_) paused_at_ = now;
}

void ClientDeadline::resume_reading(time_point now) {
  if (!paused_at_) return;
  if (line_started_) *line_started_ += now - *paused_at_;
  // The client could not be heard while paused either.
  last_activity_ = std::max(last_activity_, now);
  paused_at_.reset();
}

ClientDeadline::Verdict ClientDeadline::check(time_point now, bool listening) const {
  if (line_started_ && !paused_at_ && now - *line_started_ >= timeouts_.line) return Verdict::unfinished_line;
  if (!listening && now - last_activity_ >= timeouts_.idle) return Verdict::idle;
  return Verdict::keep;
}

ClientDeadline::time_point ClientDeadline::next_check(time_point now, bool listening) const {
  time_point next = now + timeouts_.idle;
  if (!listening) next = std::min(next, last_activity_ + timeouts_.idle);
  if (line_started_ && !paused_at_) next = std::min(next, *line_started_ + timeouts_.line);
  return std::max(next, now);
}

}  // namespace accrue::daemon::api
