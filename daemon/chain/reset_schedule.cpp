#include "daemon/chain/reset_schedule.hpp"

#include <cmath>

#include "protocol/messages.hpp"

namespace accrue::chain {

ResetScheduler::ResetScheduler(ResetScheduleSettings settings) : settings_(std::move(settings)) {
  if (settings_.threshold_fraction > 0 && !(settings_.rearm_fraction > 0))
    settings_.rearm_fraction = settings_.threshold_fraction / 2.0;
}

int ResetScheduler::weekday_utc(double unix_s) {
  const auto days = std::int64_t(std::floor(unix_s / 86400.0));
  return int(((days + 3) % 7 + 7) % 7);
}

int ResetScheduler::second_of_day_utc(double unix_s) {
  const double d = unix_s - 86400.0 * std::floor(unix_s / 86400.0);
  return int(std::floor(d));
}

void ResetScheduler::request_zero_window(double seconds) { zero_requested_s_ = seconds > 0 ? seconds : 0.0; }

bool ResetScheduler::ask_reset(double t, const std::string& why, std::vector<ScheduleAction>& out) {
  if (pending_) return true;  // already asked; the retry timer follows it
  if (resets_asked_ > 0 && t - last_reset_s_ < settings_.min_spacing_s) {
    ++resets_refused_;
    return false;
  }
  out.push_back({ScheduleDecision::reset_now, why});
  pending_ = true;
  pending_since_s_ = t;
  pending_reason_ = why;
  ++resets_asked_;
  return true;
}

void ResetScheduler::observe(double t, double utc, double v, std::uint8_t status, std::vector<ScheduleAction>& out) {
  if (!started_) {
    started_ = true;
    last_reset_s_ = t;
    last_utc_ = utc;
  }
  const bool resetting = status & protocol::status_bit::reset_active;
  if (resetting) {
    // The board is discharging (asked or on its own): that is the reset.
    board_resetting_ = true;
    pending_ = false;
    last_reset_s_ = t;
    // A discharged capacitor is below any re-arm level: arm again now. (The
    // next observation may come a whole block later, already above the re-arm
    // level; waiting to see the output low would miss the next crossing.)
    armed_ = true;
    last_utc_ = utc;
    return;
  }
  board_resetting_ = false;
  if (pending_ && t - pending_since_s_ >= settings_.command_timeout_s) {
    pending_ = false;
    ask_reset(t, "retry", out);
  }

  // Calendar: each entry fires once when UTC passes its time on a listed weekday.
  for (const CalendarEntry& e : settings_.calendar) {
    const double day0 = 86400.0 * std::floor(utc / 86400.0);
    for (double day : {day0 - 86400.0, day0}) {
      const double due = day + e.second_of_day_utc;
      if (due > last_utc_ && due <= utc && (e.weekdays >> weekday_utc(due)) & 1) {
        if (e.zero_window_s > 0) zero_requested_s_ = e.zero_window_s;
        else ask_reset(t, "calendar", out);
      }
    }
  }
  last_utc_ = utc;

  if (zero_requested_s_ >= 0 && zero_until_s_ < 0) {
    if (zero_requested_s_ > 0) {
      out.push_back({ScheduleDecision::zero_relay_on, "zero window"});
      zero_until_s_ = t + zero_requested_s_;
    }
    zero_requested_s_ = -1.0;
  }
  if (zero_until_s_ >= 0 && t >= zero_until_s_) {
    out.push_back({ScheduleDecision::zero_relay_off, "zero window"});
    zero_until_s_ = -1.0;
    // Start the next segment from a discharged capacitor.
    ask_reset(t, "calendar", out);
  }

  const double level = std::fabs(v) / settings_.full_scale_v;
  if (settings_.threshold_fraction > 0) {
    if (!armed_ && level < settings_.rearm_fraction) armed_ = true;
    // Disarmed only once a reset is really asked: a crossing inside
    // min_spacing_s is tried again at the next observation.
    if (armed_ && level >= settings_.threshold_fraction && ask_reset(t, "threshold", out)) armed_ = false;
  }
  if (reset_requested_) {
    reset_requested_ = false;
    ask_reset(t, "command", out);
  }
  if (settings_.interval_s > 0 && !in_zero_window() && t - last_reset_s_ >= settings_.interval_s)
    ask_reset(t, "interval", out);
}

}  // namespace accrue::chain
