#pragma once
// ResetScheduler decides when the host should discharge an integrator and
// when it should take a zero window. Pure: it takes what the daemon observes
// (board time from the sample index, the UTC time the clock model gives for
// it, the latest output voltage and the block's status bits) and appends
// decisions; the daemon turns them into board commands. It follows resets the
// board makes on its own (status reset_active) as if it had asked for them.
//
// Policies, any combination:
//   interval   - a reset when interval_s of board time have passed since the last one;
//   threshold  - a reset when |V| reaches threshold_fraction of full scale; re-armed
//                by the reset itself, or (when no reset followed) only once |V|
//                falls below rearm_fraction (hysteresis, so a noisy output near
//                the level cannot trigger a burst); output_v should be the
//                block's largest |V|, so a crossing inside a block is not missed;
//   calendar   - at daily or weekly UTC times: zero relay on for zero_window_s (a
//                zero-window drift measurement), off, then a reset;
//   command    - request_reset() / request_zero_window() from the operator.
// A reset asked for but not seen in the status within command_timeout_s is asked
// again; no two resets are asked closer than min_spacing_s (a request inside
// that spacing is counted in resets_refused(); a command is dropped, a
// threshold crossing is tried again at the next observation).
#include <cstdint>
#include <string>
#include <vector>

namespace accrue::chain {

struct CalendarEntry {
  int second_of_day_utc = 0;   // 0..86399
  std::uint8_t weekdays = 0x7F;  // bit 0 Monday .. bit 6 Sunday
  double zero_window_s = 0.0;  // 0: a reset only
};

struct ResetScheduleSettings {
  double interval_s = 0.0;          // 0: off
  double threshold_fraction = 0.0;  // 0: off
  double rearm_fraction = 0.0;      // 0: half the threshold
  double full_scale_v = 10.0;       // output full scale the fractions refer to
  std::vector<CalendarEntry> calendar;
  double min_spacing_s = 0.0;
  double command_timeout_s = 5.0;
};

enum class ScheduleDecision { reset_now, zero_relay_on, zero_relay_off };

struct ScheduleAction {
  ScheduleDecision decision;
  std::string reason;  // interval, threshold, calendar, command, retry
};

class ResetScheduler {
 public:
  explicit ResetScheduler(ResetScheduleSettings settings);

  // Call for every sample block (or every sample); output_v is the block's largest |output|.
  void observe(double board_time_s, double utc_unix, double output_v, std::uint8_t status,
               std::vector<ScheduleAction>& out);
  void request_reset() { reset_requested_ = true; }
  void request_zero_window(double seconds);

  bool in_zero_window() const { return zero_until_s_ >= 0; }
  std::uint64_t resets_asked() const { return resets_asked_; }
  std::uint64_t resets_refused() const { return resets_refused_; }

  // Day of week (0 = Monday) and second of day of a Unix time, UTC (1970-01-01 was a Thursday).
  static int weekday_utc(double unix_s);
  static int second_of_day_utc(double unix_s);

 private:
  // False when min_spacing_s refuses it.
  bool ask_reset(double t, const std::string& why, std::vector<ScheduleAction>& out);

  ResetScheduleSettings settings_;
  bool started_ = false;
  double last_reset_s_ = 0.0;
  double last_utc_ = 0.0;
  bool armed_ = true;
  bool pending_ = false;
  double pending_since_s_ = 0.0;
  std::string pending_reason_;
  bool reset_requested_ = false;
  double zero_requested_s_ = -1.0;
  double zero_until_s_ = -1.0;  // board time the current zero window ends; <0 none
  bool board_resetting_ = false;
  std::uint64_t resets_asked_ = 0;
  std::uint64_t resets_refused_ = 0;
};

}  // namespace accrue::chain
