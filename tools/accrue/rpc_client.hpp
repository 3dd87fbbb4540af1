#pragma once
// RpcClient: a blocking JSON-RPC 2.0 client for accrued's Unix socket, for
// the command-line tool. One request at a time, one reply line each; replies
// longer than max_reply_bytes or slower than timeout_s are errors.
// Notifications (subscriptions, progress) that arrive while a reply is
// awaited go to on_notification when it is set, and are kept in order for
// next_notification() and wait_notification().
#include <deque>
#include <functional>
#include <optional>
#include <string>

#include <nlohmann/json.hpp>

namespace accrue::client {

struct RpcResult {
  bool ok = false;
  nlohmann::json result;  // when ok
  int error_code = 0;     // JSON-RPC error code, or 0 for a transport error
  std::string error;      // when !ok
};

class RpcClient {
 public:
  explicit RpcClient(std::string socket_path, double timeout_s = 30.0);
  ~RpcClient();
  RpcClient(const RpcClient&) = delete;
  RpcClient& operator=(const RpcClient&) = delete;
  RpcResult call(const std::string& method, const nlohmann::json& params = nlohmann::json::object());
  // The next JSON-RPC notification (an object with "method" and no "id"),
  // waiting up to timeout_s. False with `why` on a timeout ("timeout"), a
  // closed connection or a line that is not JSON.
  bool next_notification(nlohmann::json& out, double timeout_s, std::string& why);
  // Also called with each notification as it arrives (progress lines).
  std::function<void(const nlohmann::json&)> on_notification;
  // Waits (no time limit but the daemon's) for a notification of `method` and gives its params
  // as the result; other notifications go to on_notification or the queue.
  RpcResult wait_notification(const std::string& method);

 private:
  void keep(nlohmann::json notification);
  bool connect(std::string& why);
  // One line from the socket into `line`, waiting at most timeout_s.
  bool read_line(std::string& line, double timeout_s, std::string& why);
  std::string path_;
  double timeout_s_;
  int fd_ = -1;
  long next_id_ = 1;
  std::string pending_;
  std::deque<nlohmann::json> notifications_;
  std::size_t max_reply_bytes_ = 64u << 20;
};

}  // namespace accrue::client
