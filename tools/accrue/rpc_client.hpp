#pragma once
// RpcClient: a blocking JSON-RPC 2.0 client for accrued's Unix socket, for
// the command-line tool. One request at a time, one reply line each; replies
// longer than max_reply_bytes or slower than timeout_s are errors.
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
  // Called with each notification (a message with a method and no id) that arrives while call() waits.
  std::function<void(const nlohmann::json&)> on_notification;
  // Waits for a notification of `method` and gives its params as the result; others go to on_notification.
  RpcResult wait_notification(const std::string& method);

 private:
  bool connect(std::string& why);
  std::string path_;
  double timeout_s_;
  int fd_ = -1;
  long next_id_ = 1;
  std::string pending_;
  std::size_t max_reply_bytes_ = 64u << 20;
};

}  // namespace accrue::client
