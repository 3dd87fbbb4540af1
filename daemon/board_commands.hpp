#pragma once
// BoardCommands sends host -> board commands (PROTOCOL.md §3.4) and follows
// each until it is acknowledged or given up. submit() gives the command the
// next request id (never 0, wrapping at 65535) and sends it at once; an ack
// with that id completes it with the board's status; if none arrives within
// timeout_s the same command (same id, so a late ack still matches) is sent
// again, up to max_attempts sends, then it completes as timed out. Acks for
// unknown ids (late duplicates, another host) are counted and ignored.
//
// Time is injected: the owner calls tick(now_s) from a timer (the daemon: its
// Asio loop; tests: by hand), and every call takes `now_s` from the same
// clock. The send function and the completion callbacks are the owner's; they
// are called from submit(), on_ack() and tick() only. Not thread-safe.
#include <cstdint>
#include <functional>
#include <map>

#include "protocol/messages.hpp"

namespace accrue::daemon {

enum class CommandOutcome { acked, timed_out, link_lost };

struct CommandResult {
  std::uint16_t request_id = 0;
  protocol::CommandOp op = protocol::CommandOp::ping;
  CommandOutcome outcome = CommandOutcome::acked;
  protocol::AckStatus status = protocol::AckStatus::ok;  // the board's, when acked
  int attempts = 0;
  double round_trip_s = 0.0;  // from the last send to the ack
};

struct BoardCommandSettings {
  double timeout_s = 0.5;
  int max_attempts = 3;
  std::size_t max_pending = 32;  // submit() refuses more (returns 0)
};

struct BoardCommandCounters {
  std::uint64_t submitted = 0, sends = 0, retries = 0, acked = 0, timed_out = 0, refused = 0, unknown_acks = 0,
                abandoned = 0;
};

class BoardCommands {
 public:
  using Send = std::function<void(const protocol::BoardCommand&)>;
  using Done = std::function<void(const CommandResult&)>;

  BoardCommands(BoardCommandSettings settings, Send send);

  // Returns the request id, or 0 when too many commands are pending.
  std::uint16_t submit(protocol::CommandOp op, std::uint32_t argument, double now_s, Done done = {});
  void on_ack(const protocol::CommandAck& ack, double now_s);
  void tick(double now_s);
  // The link went down: pending commands complete as link_lost (the board may not have seen them).
  void abandon_all();

  std::size_t pending() const { return pending_.size(); }
  const BoardCommandCounters& counters() const { return counters_; }

 private:
  struct Pending {
    protocol::BoardCommand command;
    int attempts = 0;
    double sent_at_s = 0.0;
    Done done;
  };
  std::uint16_t next_id();

  BoardCommandSettings settings_;
  Send send_;
  std::map<std::uint16_t, Pending> pending_;
  std::uint16_t last_id_ = 0;
  BoardCommandCounters counters_;
};

}  // namespace accrue::daemon
