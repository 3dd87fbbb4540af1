#pragma once
// Methods is the JSON-RPC 2.0 dispatcher: one request (or batch) as parsed
// JSON in, the reply out (nullopt for notifications). It validates the
// envelope and every parameter and answers errors with the codes JSON-RPC 2.0
// defines (-32700 parse, -32600 invalid request, -32601 no such method, -32602
// bad params, -32603 internal); -32001 means the store could not answer.
// It never throws. Methods and fields are documented in docs/api.md.
#include <functional>
#include <memory>
#include <optional>
#include <string>

#include <nlohmann/json.hpp>

#include "storage/reader.hpp"

namespace accrue::daemon::api {

namespace rpc_error {
inline constexpr int parse_error = -32700;
inline constexpr int invalid_request = -32600;
inline constexpr int method_not_found = -32601;
inline constexpr int invalid_params = -32602;
inline constexpr int internal_error = -32603;
inline constexpr int store_unavailable = -32001;
}  // namespace rpc_error

nlohmann::json error_reply(const nlohmann::json& id, int code, const std::string& message);

class Methods {
 public:
  using StatusSource = std::function<nlohmann::json()>;
  // `database` is opened read-only on first use, so the daemon starts before the file has data.
  Methods(std::string database, StatusSource status);
  // A whole request line: parses it and dispatches.
  std::optional<std::string> handle_line(std::string_view line);
  std::optional<nlohmann::json> handle(const nlohmann::json& request);

 private:
  nlohmann::json call(const std::string& method, const nlohmann::json& params, const nlohmann::json& id);
  nlohmann::json totals(const nlohmann::json& id);
  nlohmann::json runs(const nlohmann::json& id);
  nlohmann::json window(const nlohmann::json& params, const nlohmann::json& id);
  storage::Reader* reader(std::string& why);

  std::string database_;
  StatusSource status_;
  std::unique_ptr<storage::Reader> reader_;
};

}  // namespace accrue::daemon::api
