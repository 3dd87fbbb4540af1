#pragma once
// Control is what the API may ask of the board and the chain: discharge the
// integrator now, open or close a zero window, and mark an interval the user
// knows was quiet. The daemon's main wires it to the link (see main.cpp); the
// API only validates parameters and reports what the implementation says.
// Implementations run on the Asio thread and must not block: the board
// commands (reset_now, zero_window) answer through a completion instead, which
// Methods turns into a deferred reply.
#include <cstdint>
#include <functional>
#include <optional>
#include <string>

#include <nlohmann/json.hpp>

namespace accrue::daemon::api {

struct ControlResult {
  bool ok = false;
  bool bad_params = false;                     // !ok because the request's values are invalid (not the board's state)
  bool no_answer = false;                      // !ok because the board never answered: it may still have acted
  std::string message;                         // why, when !ok
  nlohmann::json detail = nlohmann::json::object();  // what was done; when !ok, the error's data (may be empty)
};

// Called exactly once with a board command's outcome, on the Asio thread:
// possibly before the call that took it returns (a refusal), else later.
using ControlDone = std::function<void(ControlResult)>;

class Control {
 public:
  virtual ~Control() = default;
  // Discharges every channel's integrator now (the protocol's reset is board-wide).
  virtual void reset_now(ControlDone done) = 0;
  // start = true closes the zero relay (input shorted), false opens it.
  virtual void zero_window(bool start, ControlDone done) = 0;
  // Records [from_index, to_index] of the active run as a quiet interval.
  virtual ControlResult mark_quiet(std::optional<int> channel, std::uint64_t from_index, std::uint64_t to_index,
                                   const std::string& note) = 0;
  // Replaces one channel's calibration settings with `entry` (the keys of a
  // config "channels" entry, without "channel"; keys left out take their
  // defaults). A change closes the active run; the next block opens a new run
  // with a new calibration version, the total carrying on. Invalid entries are
  // refused with bad_params and every error named.
  virtual ControlResult new_calibration(int channel, const nlohmann::json& entry) {
    (void)channel, (void)entry;
    return {false, false, false, "new calibrations are not offered here", nlohmann::json::object()};
  }
};

}  // namespace accrue::daemon::api
