#pragma once
// LinkControl is the daemon's Control: it turns API control requests into
// host->board command frames (protocol::BoardCommand, PROTOCOL.md) sent with
// SerialLink::send, and records each request as an event in the store. It
// refuses when the link is down or the board lacks the capability. It does
// not wait for the board's acknowledgement (the reply says so); the board's
// reset and zero-relay events arrive on the data path as usual. Quiet windows
// are recorded as "quiet_window" events and handed to the live chains'
// baseline fits. A new calibration replaces a channel's config entry through
// the config sink the daemon sets (a later reload from the file replaces it
// again: the file stays the reference).
// Borrows the link and ingest; Asio thread only.
#include <cstdint>
#include <functional>

#include "daemon/api/control.hpp"
#include "daemon/ingest.hpp"
#include "daemon/serial_link.hpp"

namespace accrue::daemon::api {

class LinkControl final : public Control {
 public:
  // next_request_id is shared with the daemon's other commands (identify).
  LinkControl(SerialLink& link, Ingest& ingest, std::uint16_t& next_request_id)
      : link_(link), ingest_(ingest), next_request_id_(next_request_id) {}
  ControlResult reset_now() override;
  ControlResult zero_window(bool start) override;
  ControlResult mark_quiet(std::optional<int> channel, std::uint64_t from_index, std::uint64_t to_index,
                           const std::string& note) override;
  ControlResult new_calibration(int channel, const nlohmann::json& entry) override;
  // Where a new calibration goes: the daemon's running config (and from there
  // Ingest::reconfigure). Without it new_calibration is refused.
  void set_config_sink(std::function<void(const DaemonConfig&)> sink) { config_sink_ = std::move(sink); }

 private:
  ControlResult send(protocol::CommandOp op, std::uint32_t argument, std::uint8_t capability, const char* what);
  SerialLink& link_;
  Ingest& ingest_;
  std::uint16_t& next_request_id_;
  std::function<void(const DaemonConfig&)> config_sink_;
};

}  // namespace accrue::daemon::api
