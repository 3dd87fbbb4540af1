#include "daemon/api/link_control.hpp"

#include "daemon/options.hpp"

namespace accrue::daemon::api {

ControlResult control_result(const OperatorResult& r) {
  ControlResult c;
  const bool sent = r.request_id != 0;
  nlohmann::json detail = {{"sent", sent},
                           {"request_id", sent ? nlohmann::json(r.request_id) : nlohmann::json(nullptr)},
                           {"acknowledged", r.outcome == OperatorOutcome::acknowledged}};
  if (sent) detail["attempts"] = r.attempts;
  if (r.outcome == OperatorOutcome::acknowledged) {
    c.ok = true;
    c.detail = std::move(detail);
    return c;
  }
  detail["outcome"] = to_string(r.outcome);
  if (r.outcome == OperatorOutcome::refused_by_board) detail["board_status"] = to_string(r.board_status);
  c.no_answer = r.outcome == OperatorOutcome::timed_out || r.outcome == OperatorOutcome::link_lost;
  c.message = r.why;
  c.detail = std::move(detail);
  return c;
}

void LinkControl::send(OperatorRequest what, ControlDone done) {
  ControlResult r;
  r.detail = {{"sent", false}, {"request_id", nullptr}, {"acknowledged", false}, {"outcome", "not_sent"}};
  if (link_.state() != LinkState::up) {
    r.message = std::string("the link is ") + to_string(link_.state());
    done(std::move(r));
    return;
  }
  if (!ingest_.status().contains("board")) {
    r.message = "the board has not identified itself yet";
    done(std::move(r));
    return;
  }
  resets_.command(what, [done = std::move(done)](const OperatorResult& o) { done(control_result(o)); });
}

void LinkControl::reset_now(ControlDone done) { send(OperatorRequest::reset_now, std::move(done)); }

void LinkControl::zero_window(bool start, ControlDone done) {
  send(start ? OperatorRequest::zero_relay_on : OperatorRequest::zero_relay_off, std::move(done));
}

ControlResult LinkControl::mark_quiet(std::optional<int> channel, std::uint64_t from_index, std::uint64_t to_index,
                                      const std::string& note) {
  ControlResult r;
  if (!ingest_.run_active()) {
    r.message = "no run is active";
    return r;
  }
  // The live chains fit what they have not yet processed; the event keeps the
  // whole interval for a later reprocessing of the stored raw samples.
  const std::optional<std::uint64_t> fit_from = ingest_.mark_quiet(channel, from_index, to_index);
  const nlohmann::json detail = {{"from_index", from_index}, {"to_index", to_index}, {"note", note}};
  ingest_.record_event("quiet_window", detail.dump(-1, ' ', false, nlohmann::json::error_handler_t::replace), from_index,
                       channel);
  r.ok = true;
  r.detail = {{"recorded", true},
              {"from_index", from_index},
              {"to_index", to_index},
              {"baseline_from_index", fit_from ? nlohmann::json(*fit_from) : nlohmann::json(nullptr)}};
  return r;
}

}  // namespace accrue::daemon::api

namespace accrue::daemon::api {

ControlResult LinkControl::new_calibration(int channel, const nlohmann::json& entry) {
  ControlResult r;
  if (!config_sink_) {
    r.message = "new calibrations are not offered by this daemon";
    return r;
  }
  if (!entry.is_object() || entry.contains("channel")) {
    r.bad_params = true;
    r.message = "settings must be an object of channel keys, without \"channel\"";
    return r;
  }
  // The same checks as the config file's "channels" entries, on a scratch config.
  nlohmann::json one = entry;
  one["channel"] = channel;
  DaemonConfig scratch;
  const std::vector<ConfigError> errors =
      load_config_text(nlohmann::json{{"channels", nlohmann::json::array({one})}}.dump(), scratch);
  if (!errors.empty() || !scratch.channels.count(channel)) {
    r.bad_params = true;
    for (const auto& e : errors) r.message += (r.message.empty() ? "" : "; ") + to_string(e);
    if (r.message.empty()) r.message = "settings were not accepted";
    return r;
  }
  DaemonConfig next = ingest_.config();
  const auto old = next.channels.find(channel);
  const bool changed = old == next.channels.end() || !(old->second == scratch.channels.at(channel));
  const bool was_active = ingest_.run_active();
  if (changed) {
    next.channels[channel] = scratch.channels.at(channel);
    ingest_.record_event("calibration_new",
                         "channel " + std::to_string(channel) + " settings replaced over the API: " +
                             entry.dump(-1, ' ', false, nlohmann::json::error_handler_t::replace),
                         std::nullopt, channel);
    config_sink_(next);
  }
  r.ok = true;
  r.detail = {{"channel", channel}, {"changed", changed}, {"run_closed", changed && was_active}};
  return r;
}

}  // namespace accrue::daemon::api
