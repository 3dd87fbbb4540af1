#include "daemon/reset_driver.hpp"

#include <algorithm>
#include <cmath>
#include <cstdio>

#include "storage/utc.hpp"

namespace accrue::daemon {

namespace {

const char* to_text(CommandOutcome o) {
  switch (o) {
    case CommandOutcome::acked: return "acked";
    case CommandOutcome::timed_out: return "timed_out";
    case CommandOutcome::link_lost: return "link_lost";
  }
  return "unknown";
}

}  // namespace

const char* to_string(protocol::AckStatus s) {
  switch (s) {
    case protocol::AckStatus::ok: return "ok";
    case protocol::AckStatus::unknown_command: return "unknown_command";
    case protocol::AckStatus::bad_argument: return "bad_argument";
    case protocol::AckStatus::busy: return "busy";
  }
  return "unknown";
}

const char* to_string(OperatorOutcome o) {
  switch (o) {
    case OperatorOutcome::acknowledged: return "acknowledged";
    case OperatorOutcome::refused_by_board: return "refused_by_board";
    case OperatorOutcome::timed_out: return "timed_out";
    case OperatorOutcome::link_lost: return "link_lost";
    case OperatorOutcome::no_capability: return "no_capability";
    case OperatorOutcome::not_sent: return "not_sent";
  }
  return "unknown";
}

chain::ResetScheduleSettings scheduler_settings(const ResetSchedule& schedule) {
  chain::ResetScheduleSettings s;
  s.full_scale_v = 1.0;  // levels are fractions of full scale
  s.interval_s = schedule.interval_s.value_or(0.0);
  s.threshold_fraction = schedule.threshold_fraction.value_or(0.0);
  if (schedule.threshold_fraction && schedule.threshold_hysteresis > 0)
    s.rearm_fraction = *schedule.threshold_fraction - schedule.threshold_hysteresis;
  for (const CalendarReset& c : schedule.calendar) {
    chain::CalendarEntry e;
    e.second_of_day_utc = c.second_of_day;
    std::uint8_t mask = 0;
    for (std::size_t d = 0; d < 7; ++d)
      if (c.weekdays[d]) mask = std::uint8_t(mask | (1u << d));
    e.weekdays = mask ? mask : 0x7F;  // no days listed: every day
    e.zero_window_s = c.zero_window_s;
    s.calendar.push_back(e);
  }
  // Two resets closer than this are refused: longer than a reset's dead time
  // (a few ms), so a status that arrives late cannot make a second reset.
  s.min_spacing_s = 0.1;
  s.command_timeout_s = 5.0;  // board time to see the reset before asking again
  return s;
}

bool schedule_enabled(const ResetSchedule& schedule) {
  return schedule.interval_s || schedule.threshold_fraction || !schedule.calendar.empty();
}

ResetDriver::ResetDriver(ResetSchedule schedule, Submit submit, Event event)
    : schedule_(std::move(schedule)), submit_(std::move(submit)), event_(std::move(event)) {}

void ResetDriver::reconfigure(const ResetSchedule& schedule) {
  schedule_ = schedule;
  scheduler_.reset();  // the next block starts the new policy
}

void ResetDriver::observe(const BlockObservation& b) {
  if (b.run_id != run_id_ || !have_block_) {
    // A new board run: its board time starts again, and so does the schedule.
    run_id_ = b.run_id;
    scheduler_.reset();
    was_resetting_ = false;
    awaiting_reason_.reset();
    told_no_switch_ = told_no_relay_ = false;
    last_reset_board_s_ = b.board_time_s;
  }
  if (!scheduler_) {
    scheduler_.emplace(scheduler_settings(schedule_));
    last_reset_board_s_ = b.board_time_s;
  }
  const bool resetting = b.status & protocol::status_bit::reset_active;
  if (resetting && !was_resetting_) {
    ++counters_.resets_seen;
    std::string why = "board";  // the board's own (its threshold, a button, a reboot)
    if (awaiting_reason_) why = *awaiting_reason_;
    else ++counters_.board_initiated;
    awaiting_reason_.reset();
    last_reset_ = LastReset{b.utc, b.last_index, why};
  }
  if (resetting) last_reset_board_s_ = b.board_time_s;
  was_resetting_ = resetting;
  have_block_ = true;
  last_ = b;

  double level = 0.0;
  for (double l : b.level_fraction) level = std::max(level, l);
  actions_.clear();
  scheduler_->observe(b.board_time_s, b.utc, level, b.status, actions_);
  for (const auto& a : actions_) act(a);
}

void ResetDriver::act(const chain::ScheduleAction& a) {
  const OperatorRequest what = a.decision == chain::ScheduleDecision::reset_now       ? OperatorRequest::reset_now
                               : a.decision == chain::ScheduleDecision::zero_relay_on ? OperatorRequest::zero_relay_on
                                                                                      : OperatorRequest::zero_relay_off;
  send(what, a.reason, false, {});
}

void ResetDriver::command(OperatorRequest what, Reported done) {
  if (!have_block_) {
    // The capabilities come with the blocks (the board's identity); without one
    // we cannot tell whether the board has the switch or relay at all.
    ++counters_.not_sent;
    ++counters_.operator_not_sent;
    if (done) done(OperatorResult{OperatorOutcome::not_sent, 0, protocol::AckStatus::ok, 0,
                                  "no sample block seen yet: the board's capabilities are unknown"});
    return;
  }
  send(what, "command", true, std::move(done));
}

void ResetDriver::send(OperatorRequest what, const std::string& reason, bool from_operator, Reported done) {
  const bool reset = what == OperatorRequest::reset_now;
  const std::uint8_t need = reset ? protocol::capability_bit::reset_switch : protocol::capability_bit::zero_relay;
  const std::uint64_t index = last_.last_index;
  const char* part = reset ? "reset switch" : "zero relay";
  if (!(last_.capabilities & need)) {
    ++counters_.not_sent;
    if (from_operator) ++counters_.operator_not_sent;
    // The schedule's decisions repeat (retries, every interval): one event per
    // run says why. An operator's request is rare and each one is answered.
    bool& told = reset ? told_no_switch_ : told_no_relay_;
    if (from_operator || !told) {
      if (!from_operator) told = true;
      event_(reset ? "reset_not_commanded" : "zero_relay_not_commanded",
             std::string("reason=") + reason + "; the board has no " + part + " (identity capabilities); " +
                 (from_operator ? "the operator's command is refused" : "the schedule's decisions are counted, not sent"),
             index);
    }
    if (done) done(OperatorResult{OperatorOutcome::no_capability, 0, protocol::AckStatus::ok, 0,
                                  std::string("the board has no ") + part});
    return;
  }
  const protocol::CommandOp op = reset ? protocol::CommandOp::reset_now : protocol::CommandOp::zero_relay;
  const std::uint32_t argument = what == OperatorRequest::zero_relay_on ? 1u : 0u;
  const std::string name = reset ? "reset" : (argument ? "zero_relay_on" : "zero_relay_off");
  const char* failed_kind = reset ? "reset_command_failed" : "zero_relay_command_failed";
  auto completed = [this, reset, from_operator, name, reason, index, failed_kind,
                    done](const CommandResult& r) {
    const bool ok = r.outcome == CommandOutcome::acked && r.status == protocol::AckStatus::ok;
    if (reset) (ok ? counters_.acked : counters_.failed) += 1;
    else if (!ok) ++counters_.zero_failed;
    if (from_operator) (ok ? counters_.operator_acked : counters_.operator_failed) += 1;
    OperatorResult out{OperatorOutcome::acknowledged, r.request_id, r.status, r.attempts, {}};
    if (!ok) {
      // Refused: a reset seen next is not this one. Unanswered: the board may
      // still have done it (an ack lost), so the reason stays until one is seen.
      if (reset && r.outcome == CommandOutcome::acked) awaiting_reason_.reset();
      std::string detail = name + " reason=" + reason + " request_id=" + std::to_string(r.request_id) +
                           " outcome=" + to_text(r.outcome) + " attempts=" + std::to_string(r.attempts);
      if (r.outcome == CommandOutcome::acked) detail += std::string(" board_status=") + to_string(r.status);
      event_(failed_kind, detail, index);
      const std::string id = "request " + std::to_string(r.request_id);
      switch (r.outcome) {
        case CommandOutcome::acked:
          out.outcome = OperatorOutcome::refused_by_board;
          out.why = "the board refused " + id + ": " + to_string(r.status);
          break;
        case CommandOutcome::timed_out:
          out.outcome = OperatorOutcome::timed_out;
          out.why = "the board did not acknowledge " + id + " after " + std::to_string(r.attempts) +
                    " sends (it may still have acted)";
          break;
        case CommandOutcome::link_lost:
          out.outcome = OperatorOutcome::link_lost;
          out.why = "the link went down before the board acknowledged " + id + " (it may still have acted)";
          break;
      }
    }
    if (done) done(out);
  };
  const std::uint16_t id = submit_(op, argument, std::move(completed));
  if (id == 0) {
    ++counters_.not_sent;
    if (from_operator) ++counters_.operator_not_sent;
    event_(failed_kind, name + " reason=" + reason + " outcome=not_sent (too many commands pending)", index);
    if (done) done(OperatorResult{OperatorOutcome::not_sent, 0, protocol::AckStatus::ok, 0, "too many commands pending"});
    return;
  }
  if (reset) {
    ++counters_.commanded;
    awaiting_reason_ = reason;
  } else {
    ++counters_.zero_commands;
  }
  if (from_operator) ++counters_.operator_commands;
  event_(reset ? "reset_commanded" : "zero_relay_commanded", name + " reason=" + reason + " request_id=" + std::to_string(id),
         index);
}

std::optional<double> ResetDriver::next_calendar_utc(double utc) const {
  std::optional<double> best;
  const double day0 = 86400.0 * std::floor(utc / 86400.0);
  for (const chain::CalendarEntry& e : scheduler_settings(schedule_).calendar) {
    for (int d = 0; d <= 7; ++d) {
      const double due = day0 + 86400.0 * d + e.second_of_day_utc;
      if (due > utc && (e.weekdays >> chain::ResetScheduler::weekday_utc(due)) & 1) {
        if (!best || due < *best) best = due;
        break;
      }
    }
  }
  return best;
}

nlohmann::json ResetDriver::status() const {
  using nlohmann::json;
  const chain::ResetScheduleSettings s = scheduler_settings(schedule_);
  json policy = {{"interval_s", schedule_.interval_s ? json(*schedule_.interval_s) : json(nullptr)},
                 {"threshold_fraction", schedule_.threshold_fraction ? json(*schedule_.threshold_fraction) : json(nullptr)},
                 {"rearm_fraction", schedule_.threshold_fraction
                                        ? json(s.rearm_fraction > 0 ? s.rearm_fraction : s.threshold_fraction / 2)
                                        : json(nullptr)},
                 {"calendar", json::array()}};
  static const char* days[] = {"mon", "tue", "wed", "thu", "fri", "sat", "sun"};
  for (const CalendarReset& c : schedule_.calendar) {
    char at[32];
    const int h = c.second_of_day / 3600, m = c.second_of_day / 60 % 60, s = c.second_of_day % 60;
    if (s) std::snprintf(at, sizeof at, "%02d:%02d:%02d", h, m, s);
    else std::snprintf(at, sizeof at, "%02d:%02d", h, m);
    json d = json::array();
    for (std::size_t k = 0; k < 7; ++k)
      if (c.weekdays[k]) d.push_back(days[k]);
    policy["calendar"].push_back({{"at", at}, {"days", d}, {"zero_window_s", c.zero_window_s}});
  }

  // The next planned reset: the earlier of the interval's and the calendar's
  // times; a threshold has no time, only a level (per channel below).
  json next = nullptr;
  if (have_block_) {
    std::optional<double> at;
    std::string why;
    if (schedule_.interval_s) {
      at = last_.utc + (last_reset_board_s_ + *schedule_.interval_s - last_.board_time_s);
      why = "interval";
    }
    if (auto cal = next_calendar_utc(last_.utc); cal && (!at || *cal < *at)) {
      at = cal;
      why = "calendar";
    }
    if (at) next = {{"utc", storage::rfc3339_utc(*at)}, {"why", why}};
    else if (schedule_.threshold_fraction) next = {{"utc", nullptr}, {"why", "threshold"}};
  }
  json last = nullptr;
  if (last_reset_)
    last = {{"utc", storage::rfc3339_utc(last_reset_->utc)}, {"sample_index", last_reset_->index},
            {"why", last_reset_->why}};
  const auto& k = counters_;
  json j = {{"enabled", schedule_enabled(schedule_)},
            {"policy", policy},
            {"board_reset_switch", have_block_ ? json(bool(last_.capabilities & protocol::capability_bit::reset_switch))
                                               : json(nullptr)},
            {"next_reset", next},
            {"last_reset", last},
            {"commanded", k.commanded},
            {"acked", k.acked},
            {"failed", k.failed},
            {"not_sent", k.not_sent},
            {"refused_spacing", scheduler_ ? scheduler_->resets_refused() : 0},
            {"resets_seen", k.resets_seen},
            {"board_initiated", k.board_initiated},
            {"zero_commands", k.zero_commands},
            {"zero_failed", k.zero_failed},
            {"operator_commands", k.operator_commands},
            {"operator_acked", k.operator_acked},
            {"operator_failed", k.operator_failed},
            {"operator_not_sent", k.operator_not_sent}};
  // Per channel: the board's one switch serves them all, so the times and
  // counts are the board's; the levels are the channel's own.
  json channels = json::array();
  if (have_block_) {
    for (std::size_t c = 0; c < last_.level_fraction.size(); ++c) {
      const double fs = c < last_.full_scale_v.size() ? last_.full_scale_v[c] : 0.0;
      json ch = {{"channel", c},
                 {"level_fraction", last_.level_fraction[c]},
                 {"threshold_v", schedule_.threshold_fraction ? json(*schedule_.threshold_fraction * fs) : json(nullptr)},
                 {"next_reset", next},
                 {"last_reset", last},
                 {"commanded", k.commanded},
                 {"acked", k.acked},
                 {"failed", k.failed}};
      channels.push_back(ch);
    }
  }
  j["channels"] = channels;
  return j;
}

}  // namespace accrue::daemon
