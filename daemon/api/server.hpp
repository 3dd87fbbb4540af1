#pragma once
// Server accepts JSON-RPC 2.0 clients on a Unix socket (mode 0660), reads
// newline-delimited requests of at most max_request_bytes each, and writes one
// reply line per request. An oversize line is answered with an Invalid
// Request error and skipped; the connection carries on. Beyond max_clients a
// new connection gets an error line and is closed. Runs on the Asio thread;
// a client's I/O error ends only that client.
#include <cstddef>
#include <memory>
#include <set>
#include <string>

#include "daemon/api/methods.hpp"
#include "daemon/asio.hpp"
#include "daemon/log.hpp"

namespace accrue::daemon::api {

struct ServerSettings {
  std::string socket_path;
  std::size_t max_request_bytes = 64 * 1024;
  std::size_t max_clients = 64;
};

class Server {
 public:
  Server(asio::io_context& io, ServerSettings settings, Methods& methods, Logger& log);
  // Binds the socket (replacing a stale file); false with `why` on failure.
  bool listen(std::string& why);
  void stop();
  std::size_t clients() const { return clients_; }

 private:
  using Socket = asio::local::stream_protocol::socket;
  asio::awaitable<void> accept_loop();
  asio::awaitable<void> session(Socket socket);

  asio::io_context& io_;
  ServerSettings settings_;
  Methods& methods_;
  Logger& log_;
  asio::local::stream_protocol::acceptor acceptor_;
  std::size_t clients_ = 0;
};

}  // namespace accrue::daemon::api
