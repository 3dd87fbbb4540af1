#include "daemon/api/server.hpp"

#include <grp.h>
#include <sys/stat.h>
#include <unistd.h>

#include <vector>

namespace accrue::daemon::api {

Server::Server(asio::io_context& io, ServerSettings settings, Methods& methods, Hub& hub, Logger& log)
    : io_(io), settings_(std::move(settings)), methods_(methods), hub_(hub), log_(log), unix_acceptor_(io), tcp_acceptor_(io) {}

namespace {
bool lookup_group(const std::string& name, gid_t& gid, std::string& why) {
  std::vector<char> buf(16384);
  group g{};
  group* found = nullptr;
  if (::getgrnam_r(name.c_str(), &g, buf.data(), buf.size(), &found) != 0 || !found) {
    why = "socket_group: no such group " + name;
    return false;
  }
  gid = found->gr_gid;
  return true;
}
}  // namespace

bool Server::listen(std::string& why) {
  ::unlink(settings_.socket_path.c_str());
  boost::system::error_code ec;
  const asio::local::stream_protocol::endpoint endpoint(settings_.socket_path);
  unix_acceptor_.open(endpoint.protocol(), ec);
  if (!ec) unix_acceptor_.bind(endpoint, ec);
  if (!ec) unix_acceptor_.listen(asio::socket_base::max_listen_connections, ec);
  if (ec) {
    why = "cannot listen on " + settings_.socket_path + ": " + ec.message();
    return false;
  }
  if (!settings_.socket_group.empty()) {
    gid_t gid = 0;
    if (!lookup_group(settings_.socket_group, gid, why)) return false;
    if (::chown(settings_.socket_path.c_str(), uid_t(-1), gid) != 0) {
      why = "cannot give " + settings_.socket_path + " to group " + settings_.socket_group + ": " + std::strerror(errno);
      return false;
    }
  }
  if (::chmod(settings_.socket_path.c_str(), 0660) != 0) {
    why = "cannot set mode 0660 on " + settings_.socket_path;
    return false;
  }
  if (!settings_.tcp_address.empty()) {
    const auto address = asio::ip::make_address(settings_.tcp_address, ec);
    if (ec) {
      why = "tcp_listen: " + settings_.tcp_address + " is not an IP address";
      return false;
    }
    if (!address.is_loopback() && !settings_.tcp_allow_remote) {
      why = "tcp_listen: " + settings_.tcp_address + " is not a loopback address (set tcp_allow_remote to allow it)";
      return false;
    }
    if (!settings_.tcp_has_token) {
      why = "tcp_listen: TCP needs a token (tcp_token_file)";
      return false;
    }
    const asio::ip::tcp::endpoint tcp_endpoint(address, settings_.tcp_port);
    tcp_acceptor_.open(tcp_endpoint.protocol(), ec);
    if (!ec) tcp_acceptor_.set_option(asio::socket_base::reuse_address(true), ec);
    if (!ec) tcp_acceptor_.bind(tcp_endpoint, ec);
    if (!ec) tcp_acceptor_.listen(asio::socket_base::max_listen_connections, ec);
    if (ec) {
      why = "cannot listen on TCP " + settings_.tcp_address + ":" + std::to_string(settings_.tcp_port) + ": " + ec.message();
      return false;
    }
    bound_tcp_port_ = tcp_acceptor_.local_endpoint().port();
    asio::co_spawn(io_, accept_loop(tcp_acceptor_, true), asio::detached);
  }
  asio::co_spawn(io_, accept_loop(unix_acceptor_, false), asio::detached);
  return true;
}

void Server::stop() {
  boost::system::error_code ec;
  unix_acceptor_.close(ec);
  tcp_acceptor_.close(ec);
  ::unlink(settings_.socket_path.c_str());
}

void Server::finished(const Sink* sink, CloseReason reason) {
  hub_.drop(sink);
  --counters_.clients;
  switch (reason) {
    case CloseReason::cut_off:
      ++counters_.cut_off;
      log_.warning("api: cut off a client that did not read its notifications");
      break;
    case CloseReason::idle:
      ++counters_.closed_idle;
      log_.info("api: closed an idle client");
      break;
    case CloseReason::unfinished_line:
      ++counters_.closed_unfinished_line;
      log_.warning("api: closed a client that left a request line unfinished");
      break;
    case CloseReason::ended:
      break;
  }
}

template <typename Acceptor>
asio::awaitable<void> Server::accept_loop(Acceptor& acceptor, bool needs_token) {
  using Socket = typename Acceptor::protocol_type::socket;
  for (;;) {
    boost::system::error_code ec;
    Socket socket = co_await acceptor.async_accept(asio::redirect_error(asio::use_awaitable, ec));
    if (ec == asio::error::operation_aborted || !acceptor.is_open()) co_return;
    if (ec) {
      log_.warning("api accept failed: " + ec.message());
      continue;
    }
    if (counters_.clients >= settings_.max_clients) {
      ++counters_.refused_too_many;
      // Best effort, without waiting: the socket is fresh, its buffer empty.
      const std::string line =
          error_reply(nullptr, rpc_error::too_many_clients,
                      "too many clients (" + std::to_string(settings_.max_clients) + ")").dump() + "\n";
      socket.non_blocking(true, ec);
      socket.write_some(asio::buffer(line), ec);
      socket.close(ec);
      continue;
    }
    ++counters_.accepted;
    ++counters_.clients;
    ConnectionHooks hooks{[this](const Sink* s, CloseReason why) { finished(s, why); },
                          [this](const Sink* s) { return hub_.subscriptions_of(s) > 0; }, settings_.now};
    auto c = std::make_shared<Connection<Socket>>(std::move(socket), settings_.limits, methods_, needs_token,
                                                  std::move(hooks));
    c->start();
  }
}

}  // namespace accrue::daemon::api
