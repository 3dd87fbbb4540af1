#include "tools/accrue/rpc_client.hpp"

#include <poll.h>
#include <sys/socket.h>
#include <sys/un.h>
#include <unistd.h>

#include <algorithm>
#include <cerrno>
#include <chrono>
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
  for (;;) {
    std::string reply;
    if (!read_line(reply, timeout_s_, r.error)) return r;
    const auto j = nlohmann::json::parse(reply, nullptr, false);
    if (j.is_discarded() || !j.is_object()) {
      r.error = "reply is not JSON";
      return r;
    }
    if (!j.contains("id") && j.contains("method")) {  // a notification, not our reply
      keep(j);
      continue;
    }
    if (j.contains("error")) {
      r.error_code = j["error"].value("code", 0);
      r.error = j["error"].value("message", std::string("error"));
      return r;
    }
    if (!j.contains("id") || j["id"] != id) continue;  // a stale reply
    r.ok = true;
    r.result = j.value("result", nlohmann::json());
    return r;
  }
}

bool RpcClient::read_line(std::string& line, double timeout_s, std::string& why) {
  char buf[65536];
  const auto deadline = std::chrono::steady_clock::now() + std::chrono::duration<double>(timeout_s);
  for (;;) {
    const auto nl = pending_.find('\n');
    if (nl != std::string::npos) {
      line = pending_.substr(0, nl);
      pending_.erase(0, nl + 1);
      return true;
    }
    if (pending_.size() > max_reply_bytes_) {
      why = "reply too large";
      return false;
    }
    const double left_ms = std::chrono::duration<double, std::milli>(deadline - std::chrono::steady_clock::now()).count();
    pollfd p{fd_, POLLIN, 0};
    const int ready = left_ms <= 0 ? 0 : ::poll(&p, 1, int(std::min(left_ms + 1.0, 2.0e9)));
    if (ready < 0 && errno == EINTR) continue;
    if (ready <= 0) {
      why = ready == 0 ? "timeout" : std::string("poll failed: ") + std::strerror(errno);
      return false;
    }
    const ssize_t n = ::recv(fd_, buf, sizeof buf, 0);
    if (n <= 0) {
      why = n == 0 ? "daemon closed the connection" : std::string("receive failed: ") + std::strerror(errno);
      return false;
    }
    pending_.append(buf, std::size_t(n));
  }
}

void RpcClient::keep(nlohmann::json notification) {
  if (on_notification) on_notification(notification);
  notifications_.push_back(std::move(notification));  // also kept: wait_notification may be after it
}

RpcResult RpcClient::wait_notification(const std::string& method) {
  RpcResult r;
  if (!connect(r.error)) return r;
  // One that came while call() waited for its reply.
  for (auto it = notifications_.begin(); it != notifications_.end(); ++it) {
    if ((*it)["method"] == method) {
      r.ok = true;
      r.result = it->value("params", nlohmann::json());
      notifications_.erase(notifications_.begin(), it + 1);
      return r;
    }
  }
  notifications_.clear();  // seen by on_notification already, or of no interest to this wait
  for (;;) {
    std::string line;
    // A long job sends progress often; the wait itself is bounded by the daemon closing.
    if (!read_line(line, 365.0 * 86400.0, r.error)) return r;
    auto j = nlohmann::json::parse(line, nullptr, false);
    if (j.is_discarded() || !j.is_object() || !j.contains("method") || j.contains("id")) continue;
    if (j["method"] == method) {
      r.ok = true;
      r.result = j.value("params", nlohmann::json());
      return r;
    }
    if (on_notification) on_notification(j);
  }
}

bool RpcClient::next_notification(nlohmann::json& out, double timeout_s, std::string& why) {
  if (!connect(why)) return false;
  for (;;) {
    if (!notifications_.empty()) {
      out = std::move(notifications_.front());
      notifications_.pop_front();
      return true;
    }
    std::string line;
    if (!read_line(line, timeout_s, why)) return false;
    auto j = nlohmann::json::parse(line, nullptr, false);
    if (j.is_discarded() || !j.is_object()) {
      why = "a line from the daemon is not JSON";
      return false;
    }
    if (!j.contains("id") && j.contains("method")) notifications_.push_back(std::move(j));
  }
}

}  // namespace accrue::client
