#include "tools/accrue/rpc_client.hpp"

#include <sys/socket.h>
#include <sys/un.h>
#include <unistd.h>

#include <cerrno>
#include <cstring>

namespace accrue::client {

RpcClient::RpcClient(std::string socket_path, double timeout_s) : path_(std::move(socket_path)), timeout_s_(timeout_s) {}

RpcClient::~RpcClient() {
  if (fd_ >= 0) ::close(fd_);
}

bool RpcClient::connect(std::string& why) {
  if (fd_ >= 0) return true;
  sockaddr_un addr{};
  if (path_.size() >= sizeof addr.sun_path) {
    why = "socket path too long: " + path_;
    return false;
  }
  fd_ = ::socket(AF_UNIX, SOCK_STREAM | SOCK_CLOEXEC, 0);
  if (fd_ < 0) {
    why = std::strerror(errno);
    return false;
  }
  timeval tv{long(timeout_s_), long((timeout_s_ - double(long(timeout_s_))) * 1e6)};
  ::setsockopt(fd_, SOL_SOCKET, SO_RCVTIMEO, &tv, sizeof tv);
  ::setsockopt(fd_, SOL_SOCKET, SO_SNDTIMEO, &tv, sizeof tv);
  addr.sun_family = AF_UNIX;
  std::memcpy(addr.sun_path, path_.c_str(), path_.size() + 1);
  if (::connect(fd_, reinterpret_cast<sockaddr*>(&addr), sizeof addr) != 0) {
    why = "cannot connect to " + path_ + ": " + std::strerror(errno) + " (is accrued running?)";
    ::close(fd_);
    fd_ = -1;
    return false;
  }
  return true;
}

RpcResult RpcClient::call(const std::string& method, const nlohmann::json& params) {
  RpcResult r;
  if (!connect(r.error)) return r;
  const long id = next_id_++;
  const std::string line = nlohmann::json{{"jsonrpc", "2.0"}, {"id", id}, {"method", method}, {"params", params}}.dump() + "\n";
  for (std::size_t done = 0; done < line.size();) {
    const ssize_t w = ::send(fd_, line.data() + done, line.size() - done, MSG_NOSIGNAL);
    if (w <= 0) {
      r.error = std::string("send failed: ") + std::strerror(errno);
      return r;
    }
    done += std::size_t(w);
  }
  char buf[65536];
  for (;;) {
    const auto nl = pending_.find('\n');
    if (nl != std::string::npos) {
      const std::string reply = pending_.substr(0, nl);
      pending_.erase(0, nl + 1);
      const auto j = nlohmann::json::parse(reply, nullptr, false);
      if (j.is_discarded() || !j.is_object()) {
        r.error = "reply is not JSON";
        return r;
      }
      if (j.contains("error")) {
        r.error_code = j["error"].value("code", 0);
        r.error = j["error"].value("message", std::string("error"));
        return r;
      }
      if (!j.contains("id") || j["id"] != id) {  // a notification or a stale reply
        if (on_notification && j.contains("method") && !j.contains("id")) on_notification(j);
        continue;
      }
      r.ok = true;
      r.result = j.value("result", nlohmann::json());
      return r;
    }
    if (pending_.size() > max_reply_bytes_) {
      r.error = "reply too large";
      return r;
    }
    const ssize_t n = ::recv(fd_, buf, sizeof buf, 0);
    if (n <= 0) {
      r.error = n == 0 ? "daemon closed the connection" : std::string("receive failed: ") + std::strerror(errno);
      return r;
    }
    pending_.append(buf, std::size_t(n));
  }
}

RpcResult RpcClient::wait_notification(const std::string& method) {
  RpcResult r;
  if (!connect(r.error)) return r;
  char buf[65536];
  for (;;) {
    const auto nl = pending_.find('\n');
    if (nl != std::string::npos) {
      const std::string line = pending_.substr(0, nl);
      pending_.erase(0, nl + 1);
      const auto j = nlohmann::json::parse(line, nullptr, false);
      if (j.is_discarded() || !j.is_object() || !j.contains("method") || j.contains("id")) continue;
      if (j["method"] == method) {
        r.ok = true;
        r.result = j.value("params", nlohmann::json());
        return r;
      }
      if (on_notification) on_notification(j);
      continue;
    }
    if (pending_.size() > max_reply_bytes_) {
      r.error = "message too large";
      return r;
    }
    const ssize_t n = ::recv(fd_, buf, sizeof buf, 0);
    if (n <= 0) {
      r.error = n == 0 ? "daemon closed the connection" : std::string("receive failed: ") + std::strerror(errno);
      return r;
    }
    pending_.append(buf, std::size_t(n));
  }
}

}  // namespace accrue::client
