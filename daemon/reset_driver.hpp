#pragma once
// ResetDriver carries out the config's reset_schedule on a board. It owns one
// chain::ResetScheduler per board run (the board's one reset switch discharges
// every channel together, PROTOCOL.md §3.2), feeds it every accepted block
// (the largest output level over the channels), and turns its decisions into
// board commands through `submit` (the daemon's BoardCommands, which retries
// and follows acks). A board without a reset switch (or zero relay) is never
// sent the command: the decision is counted and one event per run says why.
// Resets the board makes on its own are followed as before: the scheduler
// sees them in the status bits and counts from them.
//
// command() is the operator's way in (the API's reset_now, zero_start,
// zero_stop): the same send path as the schedule's decisions (one private
// send()), the same counters plus operator_* ones, the same events (reason
// "command"), and a board without the capability is refused, each time with an
// event. Its `done` is called exactly once with the outcome: at once when the
// command cannot be sent, else from the command's completion (acked, refused
// by the board, timed out, link lost).
//
// It records an event for every command it sends and every command that fails
// (timed out, link lost, or refused by the board), through `event`. status()
// gives the policy, the next planned reset, the last reset seen and why, and
// the counters, also per channel. Borrows nothing; the callbacks are the
// owner's and are called from observe(), command() and from the command
// completions. The driver must outlive the commands it submitted (their
// completions call it). Asio thread only.
#include <cstdint>
#include <functional>
#include <optional>
#include <string>

#include <nlohmann/json.hpp>

#include "daemon/block_observation.hpp"
#include "daemon/board_commands.hpp"
#include "daemon/chain/reset_schedule.hpp"
#include "daemon/options.hpp"

namespace accrue::daemon {

// The config's reset schedule as scheduler settings. Levels are fractions of
// full scale (full_scale_v = 1): the driver passes each block's largest
// |output| / full scale. threshold_hysteresis h re-arms below threshold - h;
// without it the scheduler re-arms below half the threshold.
chain::ResetScheduleSettings scheduler_settings(const ResetSchedule& schedule);
bool schedule_enabled(const ResetSchedule& schedule);

struct ResetDriverCounters {
  std::uint64_t commanded = 0;        // reset commands sent
  std::uint64_t acked = 0;            // ... acknowledged with status ok
  std::uint64_t failed = 0;           // ... timed out, link lost, or refused by the board
  std::uint64_t not_sent = 0;         // decisions the board could not take (no reset switch, queue full)
  std::uint64_t resets_seen = 0;      // reset_active edges in the data, asked for or not
  std::uint64_t board_initiated = 0;  // ... of those, with no command of ours waiting
  std::uint64_t zero_commands = 0;    // zero relay on/off commands sent
  std::uint64_t zero_failed = 0;
  // Operator commands (command()), also counted above with the schedule's.
  std::uint64_t operator_commands = 0;  // sent to the board
  std::uint64_t operator_acked = 0;     // ... acknowledged with status ok
  std::uint64_t operator_failed = 0;    // ... timed out, link lost, or refused by the board
  std::uint64_t operator_not_sent = 0;  // refused before sending (no capability, board unknown, queue full)
};

// What an operator may ask for.
enum class OperatorRequest { reset_now, zero_relay_on, zero_relay_off };

enum class OperatorOutcome {
  acknowledged,      // the board acked with status ok
  refused_by_board,  // acked with another status (board_status)
  timed_out,         // sent max_attempts times, never acked: the board may still have acted
  link_lost,         // the link went down before an ack: the board may still have acted
  no_capability,     // the board has no reset switch / zero relay: not sent
  not_sent,          // no block seen yet (capabilities unknown) or too many commands pending
};
const char* to_string(OperatorOutcome o);
const char* to_string(protocol::AckStatus s);

struct OperatorResult {
  OperatorOutcome outcome = OperatorOutcome::not_sent;
  std::uint16_t request_id = 0;                          // 0 when not sent
  protocol::AckStatus board_status = protocol::AckStatus::ok;  // the board's, when it answered
  int attempts = 0;                                      // sends made
  std::string why;                                       // when not acknowledged: a sentence for the operator
};

class ResetDriver {
 public:
  using Done = std::function<void(const CommandResult&)>;
  // Sends a command; returns its request id, 0 when refused (too many pending).
  using Submit = std::function<std::uint16_t(protocol::CommandOp, std::uint32_t argument, Done)>;
  using Event = std::function<void(const std::string& kind, const std::string& detail, std::uint64_t index)>;
  using Reported = std::function<void(const OperatorResult&)>;

  ResetDriver(ResetSchedule schedule, Submit submit, Event event);

  void observe(const BlockObservation& block);
  // A reloaded schedule: the next block starts the new policy (its interval
  // counts from that block); the counters carry on.
  void reconfigure(const ResetSchedule& schedule);
  // An operator's command, sent now (not at the next block). The capability is
  // the last observed block's (the board's identity); before any block it is
  // unknown and the command is not sent. `done` may be empty.
  void command(OperatorRequest what, Reported done);

  nlohmann::json status() const;
  const ResetDriverCounters& counters() const { return counters_; }

 private:
  void act(const chain::ScheduleAction& a);
  // The one send path: capability check, submit, counters, events, completion.
  // Uses the last observed block (capabilities, sample index for events).
  void send(OperatorRequest what, const std::string& reason, bool from_operator, Reported done);
  std::optional<double> next_calendar_utc(double utc) const;

  ResetSchedule schedule_;
  Submit submit_;
  Event event_;
  std::optional<chain::ResetScheduler> scheduler_;  // per run; created at the run's first block
  std::int64_t run_id_ = 0;
  bool have_block_ = false;
  BlockObservation last_;  // copy-assigned each block: its vectors keep their storage
  std::vector<chain::ScheduleAction> actions_;  // reused per block (the ingest thread calls observe for every block)
  bool was_resetting_ = false;
  double last_reset_board_s_ = 0.0;  // the interval counts from here (the run's start or the last reset)
  std::optional<std::string> awaiting_reason_;  // a reset we asked for and have not yet seen
  struct LastReset {
    double utc = 0.0;
    std::uint64_t index = 0;
    std::string why;
  };
  std::optional<LastReset> last_reset_;
  bool told_no_switch_ = false, told_no_relay_ = false;  // once per run
  ResetDriverCounters counters_;
};

}  // namespace accrue::daemon
