#include "daemon/api/link_control.hpp"

#include "daemon/options.hpp"
#include "protocol/encoder.hpp"

namespace accrue::daemon::api {

ControlResult LinkControl::send(protocol::CommandOp op, std::uint32_t argument, std::uint8_t capability, const char* what) {
  ControlResult r;
  if (link_.state() != LinkState::up) {
    r.message = std::string("the link is ") + to_string(link_.state());
    return r;
  }
  const nlohmann::json status = ingest_.status();
  if (!status.contains("board")) {
    r.message = "the board has not identified itself yet";
    return r;
  }
  if (!(status["board"].value("capabilities", 0) & capability)) {
    r.message = std::string("the board does not offer ") + what;
    return r;
  }
  const std::uint16_t request_id = next_request_id_++;
  link_.send(protocol::encode(protocol::BoardCommand{request_id, op, argument}));
  ingest_.record_event("control", std::string(what) + " requested over the API, request id " + std::to_string(request_id));
  r.ok = true;
  r.detail = {{"sent", true}, {"request_id", request_id}, {"acknowledged", false}};
  return r;
}

ControlResult LinkControl::reset_now() {
  return send(protocol::CommandOp::reset_now, 0, protocol::capability_bit::reset_switch, "reset now");
}

ControlResult LinkControl::zero_window(bool start) {
  return send(protocol::CommandOp::zero_relay, start ? 1 : 0, protocol::capability_bit::zero_relay,
              start ? "zero window start" : "zero window stop");
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
