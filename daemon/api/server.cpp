#include "daemon/api/server.hpp"

#include <sys/stat.h>
#include <unistd.h>

#include <array>
#include <cstring>

namespace accrue::daemon::api {

Server::Server(asio::io_context& io, ServerSettings settings, Methods& methods, Logger& log)
    : io_(io), settings_(std::move(settings)), methods_(methods), log_(log), acceptor_(io) {}

bool Server::listen(std::string& why) {
  ::unlink(settings_.socket_path.c_str());
  boost::system::error_code ec;
  const asio::local::stream_protocol::endpoint endpoint(settings_.socket_path);
  acceptor_.open(endpoint.protocol(), ec);
  if (!ec) acceptor_.bind(endpoint, ec);
  if (!ec) acceptor_.listen(asio::socket_base::max_listen_connections, ec);
  if (ec) {
    why = "cannot listen on " + settings_.socket_path + ": " + ec.message();
    return false;
  }
  if (::chmod(settings_.socket_path.c_str(), 0660) != 0) {
    why = "cannot set mode 0660 on " + settings_.socket_path;
    return false;
  }
  asio::co_spawn(io_, accept_loop(), asio::detached);
  return true;
}

void Server::stop() {
  boost::system::error_code ec;
  acceptor_.close(ec);
  ::unlink(settings_.socket_path.c_str());
}

asio::awaitable<void> Server::accept_loop() {
  for (;;) {
    boost::system::error_code ec;
    Socket socket = co_await acceptor_.async_accept(asio::redirect_error(asio::use_awaitable, ec));
    if (ec == asio::error::operation_aborted || !acceptor_.is_open()) co_return;
    if (ec) {
      log_.warning("api accept failed: " + ec.message());
      continue;
    }
    asio::co_spawn(io_, session(std::move(socket)), asio::detached);
  }
}

asio::awaitable<void> Server::session(Socket socket) {
  boost::system::error_code ec;
  if (clients_ >= settings_.max_clients) {
    const std::string line = error_reply(nullptr, rpc_error::internal_error, "too many clients").dump() + "\n";
    co_await asio::async_write(socket, asio::buffer(line), asio::redirect_error(asio::use_awaitable, ec));
    co_return;
  }
  ++clients_;
  std::string line;
  bool discarding = false;  // inside an oversize line: drop until its newline
  std::array<char, 8192> chunk;
  for (;;) {
    const std::size_t n = co_await socket.async_read_some(asio::buffer(chunk), asio::redirect_error(asio::use_awaitable, ec));
    if (ec) break;
    std::size_t at = 0;
    while (at < n) {
      const char* begin = chunk.data() + at;
      const char* nl = static_cast<const char*>(std::memchr(begin, '\n', n - at));
      const std::size_t take = nl ? std::size_t(nl - begin) : n - at;
      at += take + (nl ? 1 : 0);
      if (!discarding) {
        if (line.size() + take > settings_.max_request_bytes) {
          discarding = true;
          line.clear();
        } else {
          line.append(begin, take);
        }
      }
      if (!nl) continue;
      std::string reply;
      if (discarding) {
        reply = error_reply(nullptr, rpc_error::invalid_request,
                            "Invalid Request: line longer than " + std::to_string(settings_.max_request_bytes) + " bytes")
                    .dump();
        discarding = false;
      } else {
        if (!line.empty() && line.back() == '\r') line.pop_back();
        if (line.find_first_not_of(" \t") == std::string::npos) {
          line.clear();
          continue;
        }
        auto r = methods_.handle_line(line);
        line.clear();
        if (!r) continue;
        reply = std::move(*r);
      }
      reply.push_back('\n');
      co_await asio::async_write(socket, asio::buffer(reply), asio::redirect_error(asio::use_awaitable, ec));
      if (ec) break;
    }
    if (ec) break;
  }
  --clients_;
}

}  // namespace accrue::daemon::api
