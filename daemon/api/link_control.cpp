#include "daemon/api/link_control.hpp"

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
  const nlohmann::json detail = {{"from_index", from_index}, {"to_index", to_index}, {"note", note}};
  ingest_.record_event("quiet_window", detail.dump(-1, ' ', false, nlohmann::json::error_handler_t::replace), from_index,
                       channel);
  r.ok = true;
  r.detail = {{"recorded", true}, {"from_index", from_index}, {"to_index", to_index}};
  return r;
}

}  // namespace accrue::daemon::api
