#pragma once
// LinkControl is the daemon's Control. Board commands (reset now, zero window
// start/stop) go through the daemon's ResetDriver::command, the same path as
// the reset schedule's: BoardCommands' request ids, acks and retries, the
// driver's counters and events (reset_commanded, ... reason=command). It
// refuses at once when the link is down or the board has not identified
// itself; the driver refuses a board without the capability. The completion
// comes when the outcome is known (acked, refused by the board, timed out,
// link lost), as a ControlResult made by control_result(). Quiet windows are
// recorded as "quiet_window" events and handed to the live chains' baseline
// fits. A new calibration replaces a channel's config entry through the
// config sink the daemon sets (a later reload from the file replaces it
// again: the file stays the reference).
// Borrows the link, ingest and the reset driver, which must outlive the
// commands in flight; Asio thread only.
#include <cstdint>
#include <functional>

#include "daemon/api/control.hpp"
#include "daemon/ingest.hpp"
#include "daemon/reset_driver.hpp"
#include "daemon/serial_link.hpp"

namespace accrue::daemon::api {

// An operator command's outcome as the API reports it: ok with {"sent",
// "request_id", "acknowledged": true, "attempts"} when acked; otherwise !ok
// with the reason, no_answer set when the board may still have acted (timed
// out, link lost), and the same keys (plus "outcome", "board_status" when the
// board answered) as the error's data.
ControlResult control_result(const OperatorResult& r);

class LinkControl final : public Control {
 public:
  LinkControl(SerialLink& link, Ingest& ingest, ResetDriver& resets) : link_(link), ingest_(ingest), resets_(resets) {}
  void reset_now(ControlDone done) override;
  void zero_window(bool start, ControlDone done) override;
  ControlResult mark_quiet(std::optional<int> channel, std::uint64_t from_index, std::uint64_t to_index,
                           const std::string& note) override;
  ControlResult new_calibration(int channel, const nlohmann::json& entry) override;
  // Where a new calibration goes: the daemon's running config (and from there
  // Ingest::reconfigure). Without it new_calibration is refused.
  void set_config_sink(std::function<void(const DaemonConfig&)> sink) { config_sink_ = std::move(sink); }

 private:
  void send(OperatorRequest what, ControlDone done);
  SerialLink& link_;
  Ingest& ingest_;
  ResetDriver& resets_;
  std::function<void(const DaemonConfig&)> config_sink_;
};

}  // namespace accrue::daemon::api
