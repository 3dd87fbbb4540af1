#pragma once
// Server accepts JSON-RPC 2.0 clients on a Unix socket (mode 0660, group
// from the config when set) and, when configured, on TCP. TCP binds to a
// loopback address unless allow_remote is set, and only with a token: a TCP
// client must call "authenticate" first (see docs/api.md). Beyond max_clients
// (Unix and TCP together) a new connection gets one error line and is closed.
// Each client is a Connection with its own bounded outgoing queue and its own
// idle and unfinished-line deadlines (settings.limits.timeouts), read from the
// injected clock `now`. Runs on the Asio thread; a client's I/O error ends
// only that client.
#include <cstddef>
#include <chrono>
#include <cstdint>
#include <functional>
#include <memory>
#include <string>

#include "daemon/api/connection.hpp"
#include "daemon/api/hub.hpp"
#include "daemon/api/methods.hpp"
#include "daemon/asio.hpp"
#include "daemon/log.hpp"

namespace accrue::daemon::api {

struct ServerSettings {
  std::string socket_path;
  std::string socket_group;   // empty: the daemon's own group
  std::string tcp_address;    // empty: no TCP listener
  std::uint16_t tcp_port = 0;
  bool tcp_allow_remote = false;
  bool tcp_has_token = false;  // TCP refuses to start without one
  std::size_t max_clients = 64;
  ConnectionLimits limits;
  std::function<std::chrono::steady_clock::time_point()> now = [] { return std::chrono::steady_clock::now(); };
};

struct ServerCounters {
  std::uint64_t accepted = 0;
  std::uint64_t refused_too_many = 0;
  std::uint64_t cut_off = 0;
  std::uint64_t closed_idle = 0;             // sent nothing and read nothing for the idle timeout
  std::uint64_t closed_unfinished_line = 0;  // left a request line unfinished for the line timeout
  std::size_t clients = 0;
};

class Server {
 public:
  Server(asio::io_context& io, ServerSettings settings, Methods& methods, Hub& hub, Logger& log);
  // Binds the listeners (replacing a stale socket file); false with `why` on failure.
  bool listen(std::string& why);
  void stop();
  const ServerCounters& counters() const { return counters_; }
  std::uint16_t tcp_port() const { return bound_tcp_port_; }

 private:
  template <typename Acceptor>
  asio::awaitable<void> accept_loop(Acceptor& acceptor, bool needs_token);
  void finished(const Sink* sink, CloseReason reason);

  asio::io_context& io_;
  ServerSettings settings_;
  Methods& methods_;
  Hub& hub_;
  Logger& log_;
  asio::local::stream_protocol::acceptor unix_acceptor_;
  asio::ip::tcp::acceptor tcp_acceptor_;
  std::uint16_t bound_tcp_port_ = 0;
  ServerCounters counters_;
};

}  // namespace accrue::daemon::api
