#pragma once
// SerialLink keeps one serial device open and reads it on the Asio thread.
// It resolves the configured selector with libserialport, opens and
// configures the device with Asio (which also handles pseudo-terminals), hands
// every chunk read to the bytes handler with its host receive time, and on
// end-of-file or any error closes, reports the state, and reopens with
// exponential backoff (0.1 s doubling to reconnect_max_s). It owns the port;
// the handlers must outlive it. No exception leaves its handlers.
#include <cstdint>
#include <deque>
#include <functional>
#include <span>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "daemon/asio.hpp"
#include "daemon/log.hpp"

namespace accrue::daemon {

enum class LinkState { connecting, up, retrying, stopped };
const char* to_string(LinkState s);

struct LinkSettings {
  std::string selector;
  unsigned baud = 921600;
  double reconnect_max_s = 30.0;
  std::string parity = "none";        // none, odd, even (checked by the config loader)
  std::string flow_control = "none";  // none, software, hardware
};

class SerialLink {
 public:
  using Clock = std::function<double()>;
  using BytesHandler = std::function<void(std::span<const std::uint8_t>, double receive_unix)>;
  using UpHandler = std::function<void()>;
  using DownHandler = std::function<void(const std::string& why)>;

  SerialLink(asio::io_context& io, LinkSettings settings, Logger& log, Clock clock, BytesHandler on_bytes,
             UpHandler on_up, DownHandler on_down);
  void start();
  void stop();
  // Queues bytes for the board; dropped (and counted) while the link is down.
  void send(std::vector<std::uint8_t> bytes);

  LinkState state() const { return state_; }
  const std::string& device_path() const { return device_path_; }
  const std::string& last_error() const { return last_error_; }
  std::uint64_t opens() const { return opens_; }
  std::uint64_t drops() const { return drops_; }
  std::uint64_t unsent_commands() const { return unsent_; }
  // When the state last changed (injected clock), and the wait before the next open attempt.
  double state_since_unix() const { return state_since_unix_; }
  double backoff_s() const { return backoff_s_; }
  // The link as a JSON-ready record for status: state, device, USB metadata, counters.
  nlohmann::json status() const;

 private:
  asio::awaitable<void> run();
  asio::awaitable<void> write_queued();
  bool open_port();
  void set_state(LinkState s);

  asio::io_context& io_;
  LinkSettings settings_;
  Logger& log_;
  Clock clock_;
  BytesHandler on_bytes_;
  UpHandler on_up_;
  DownHandler on_down_;
  asio::serial_port port_;
  asio::steady_timer backoff_timer_;
  LinkState state_ = LinkState::connecting;
  bool stopping_ = false;
  bool writing_ = false;
  std::deque<std::vector<std::uint8_t>> outbox_;
  std::string device_path_;
  std::string last_error_;
  std::uint64_t opens_ = 0, drops_ = 0, unsent_ = 0, failed_opens_ = 0;
  double state_since_unix_ = 0.0;
  double backoff_s_ = 0.0;
};

}  // namespace accrue::daemon
