#pragma once
// ClientDeadline decides when one API client has overstayed its welcome, so
// that api_max_clients silent or slow clients cannot hold every slot:
// - idle: nothing received from the client and nothing written to it for
//   `idle` (a client that neither asks nor reads). A subscriber is never idle
//   (it may wait hours for an event); its non-reading is handled by cut_off.
// - unfinished line: a request line begun but not ended by its newline
//   within `line` (a slowloris dribbling bytes). Time while the daemon itself
//   stops reading (back-pressure on a client that does not read its replies)
//   does not count against the client.
// Pure: the time is passed in by the caller (Connection asks its injected
// clock), so tests drive it with any time they like. One per Connection.
#include <chrono>
#include <optional>

namespace accrue::daemon::api {

struct ClientTimeouts {
  std::chrono::steady_clock::duration idle = std::chrono::seconds(60);
  std::chrono::steady_clock::duration line = std::chrono::seconds(10);
};

class ClientDeadline {
 public:
  using time_point = std::chrono::steady_clock::time_point;
  enum class Verdict { keep, idle, unfinished_line };

  ClientDeadline(ClientTimeouts timeouts, time_point now);
  // Bytes came in at `now`. `ended_a_line`: they held at least one newline;
  // `line_open`: after them a line is begun and not yet ended.
  void received(time_point now, bool ended_a_line, bool line_open);
  // A reply or notification finished writing at `now` (the client reads).
  void wrote(time_point now);
  // The daemon stops reading this client (back-pressure) / starts again.
  void pause_reading(time_point now);
  void resume_reading(time_point now);

  // `listening`: the client holds a subscription.
  Verdict check(time_point now, bool listening) const;
  // The earliest moment check() could say other than keep (given no new
  // activity); at most `idle` ahead, so a change of `listening` is seen.
  time_point next_check(time_point now, bool listening) const;

 private:
  ClientTimeouts timeouts_;
  time_point last_activity_;
  std::optional<time_point> line_started_;  // shifted forward by paused time
  std::optional<time_point> paused_at_;
};

}  // namespace accrue::daemon::api
