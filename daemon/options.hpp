#pragma once
// The daemon's settings: defaults, then a JSON config file (comments allowed),
// then command-line flags. load_config() checks every key and value and names
// the key, the value and the reason for each error; unknown keys are errors.
// validate() adds the checks that need the whole config or the machine (a
// required device, a readable token file, a group that exists).
//
// Some keys are carried here for features other rooms wire (reset schedule,
// zero windows, retention, disk floor, TCP, protocol variant, link framing):
// they are fully validated so a bad value never reaches those features.
#include <array>
#include <map>
#include <optional>
#include <string>
#include <vector>

#include "daemon/chain/baseline_fit.hpp"
#include "daemon/chain/calibration.hpp"
#include "daemon/log.hpp"

namespace accrue::daemon {

// Per-channel calibration overrides; what is unset comes from the board's identity.
// Values are SI: a plain number in the key's unit, or text with a unit ("4.7 nF").
struct ChannelConfig {
  chain::SensorKind sensor = chain::SensorKind::charge;
  std::optional<double> c_farad, r1_ohm, r2_ohm, gain;
  std::optional<int> zero_code;
  bool inverting = true;
  chain::SensorModel sensor_model;  // turns, area, M, G, S as the sensor needs
  bool leak_correction = true;      // with R2: exact time-domain leak correction
  chain::BaselineModel baseline_model = chain::BaselineModel::linear;
  chain::BaselineRobust baseline_robust = chain::BaselineRobust::none;
  bool operator==(const ChannelConfig&) const = default;
};

enum class Parity { none, odd, even };
enum class FlowControl { none, hardware, software };
// Which of the board protocols the link speaks (PROTOCOL.md): binary frames,
// or the text-line variant for simple microcontroller boards.
enum class ProtocolVariant { frames, text_lines };

const char* to_string(Parity p);
const char* to_string(FlowControl f);
const char* to_string(ProtocolVariant v);

// One calendar reset: at a UTC time of day on the listed weekdays (all when
// empty), optionally followed by a zero-window measurement of zero_window_s.
struct CalendarReset {
  int second_of_day = 0;          // 0..86399, UTC
  std::array<bool, 7> weekdays{};  // [0] = Monday; all false = every day
  double zero_window_s = 0.0;
};

// When the daemon resets the integrator (besides resets the board does itself
// and resets on command). Each trigger is off when unset.
struct ResetSchedule {
  std::optional<double> interval_s;
  std::optional<double> threshold_fraction;   // |Vout| above this fraction of full scale
  double threshold_hysteresis = 0.0;          // fraction of full scale below the threshold to re-arm
  std::vector<CalendarReset> calendar;
  bool operator==(const ResetSchedule&) const = default;
};
inline bool operator==(const CalendarReset& a, const CalendarReset& b) {
  return a.second_of_day == b.second_of_day && a.weekdays == b.weekdays && a.zero_window_s == b.zero_window_s;
}

// A span the user marks quiet (input at zero) so the drift baseline may use it.
struct ZeroWindow {
  double from_unix = 0.0, to_unix = 0.0;
  std::vector<int> channels;  // empty = every channel
  bool operator==(const ZeroWindow&) const = default;
};

// Days to keep each tier; 0 keeps it for ever.
struct Retention {
  double raw_days = 14.0;
  double series_days = 0.0;
  double rollup_days = 0.0;
};

// Optional JSON-RPC over TCP; only with a bearer token read from token_file.
struct TcpListen {
  std::string address = "127.0.0.1";
  int port = 0;
  std::string token_file;
  bool allow_remote = false;  // must be true to bind other than loopback
};

struct DaemonConfig {
  // device and link
  std::string device;  // path, usb-serial:SERIAL or usb-id:VVVV:PPPP
  int baud = 921600;
  int data_bits = 8;
  int stop_bits = 1;
  Parity parity = Parity::none;
  FlowControl flow_control = FlowControl::none;
  double reconnect_max_s = 30.0;
  ProtocolVariant protocol = ProtocolVariant::frames;
  // measurement chain
  double settle_s = 0.002;
  int end_window = 16;
  double series_interval_s = 1.0;
  std::map<int, ChannelConfig> channels;
  ResetSchedule reset_schedule;
  std::vector<ZeroWindow> zero_windows;
  // capture and replay (tests, field diagnosis)
  std::string record_path;  // when set, every byte read is also written to this capture file
  std::string replay_path;  // when set, the capture is fed through the daemon instead of a device
  // storage
  std::string database = "accrue.db";
  int commit_interval_ms = 250;
  Retention retention;
  double disk_floor_mb = 100.0;
  // The writer's queue (storage::WriterSettings), MiB (2^20 bytes): raw blocks
  // that would take it above the soft limit are shed, series points above the
  // hard limit. 8 MiB keeps the daemon under 30 MB resident at full speed
  // (tools/bench/RESULTS.md); the hard limit holds derived rows through an outage.
  double writer_queue_soft_limit_mib = 8.0;
  double writer_queue_hard_limit_mib = 256.0;
  // api
  std::string socket_path = "accrued.sock";
  std::string socket_group;  // empty = the daemon's own group
  std::optional<TcpListen> tcp;
  int api_max_clients = 64;                // Unix and TCP clients together
  int api_client_buffer_bytes = 4 << 20;   // per-client outgoing queue
  double api_idle_timeout_s = 60.0;        // a client that neither sends nor reads (and holds no subscription) is closed
  double api_line_timeout_s = 10.0;        // a request line must be finished within this once begun
  // service
  LogLevel log_level = LogLevel::info;
  double stop_timeout_s = 10.0;  // SIGTERM: flush and commit within this, else exit 1
};

struct ConfigError {
  std::string key;     // dotted path, e.g. "channels[0].c_farad"
  std::string reason;
  std::string value = {};  // the offending value as JSON text, empty when there is none
};
// "key = value: reason" (or "key: reason" without a value), one line.
std::string to_string(const ConfigError& e);

// Applies the file's keys over `config`. Returns every error found (empty = ok).
std::vector<ConfigError> load_config(const std::string& path, DaemonConfig& config);
std::vector<ConfigError> load_config_text(const std::string& text, DaemonConfig& config);
std::vector<ConfigError> validate(const DaemonConfig& config);

}  // namespace accrue::daemon
