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
// It records an event for every command it sends and every command that fails
// (timed out, link lost, or refused by the board), through `event`. status()
// gives the policy, the next planned reset, the last reset seen and why, and
// the counters, also per channel. Borrows nothing; the callbacks are the
// owner's and are called from observe() and from the command completions.
// Asio thread only.
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
};

class ResetDriver {
 public:
  using Done = std::function<void(const CommandResult&)>;
  // Sends a command; returns its request id, 0 when refused (too many pending).
  using Submit = std::function<std::uint16_t(protocol::CommandOp, std::uint32_t argument, Done)>;
  using Event = std::function<void(const std::string& kind, const std::string& detail, std::uint64_t index)>;

  ResetDriver(ResetSchedule schedule, Submit submit, Event event);

  void observe(const BlockObservation& block);
  // A reloaded schedule: the next block starts the new policy (its interval
  // counts from that block); the counters carry on.
  void reconfigure(const ResetSchedule& schedule);

  nlohmann::json status() const;
  const ResetDriverCounters& counters() const { return counters_; }

 private:
  void act(const chain::ScheduleAction& a, const BlockObservation& b);
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
