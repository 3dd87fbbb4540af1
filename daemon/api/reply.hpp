#pragma once
// Reply is one JSON-RPC reply as Methods produces it: a JSON value or, for a
// reply too large to build cheaply as a tree (a window page of thousands of
// points), the same reply already serialized. Either way it gives the line to
// send, and the value when the reply goes into a batch's array.
#include <string>
#include <utility>

#include <nlohmann/json.hpp>

namespace accrue::daemon::api {

class Reply {
 public:
  Reply(nlohmann::json value) : value_(std::move(value)) {}  // NOLINT: implicit, so methods return json as before
  static Reply serialized(std::string text) {
    Reply r(nullptr);
    r.text_ = std::move(text);
    r.is_text_ = true;
    return r;
  }
  std::string dump() && {
    return is_text_ ? std::move(text_) : value_.dump(-1, ' ', false, nlohmann::json::error_handler_t::replace);
  }
  nlohmann::json to_json() && { return is_text_ ? nlohmann::json::parse(text_) : std::move(value_); }

 private:
  nlohmann::json value_;
  std::string text_;
  bool is_text_ = false;
};

}  // namespace accrue::daemon::api
