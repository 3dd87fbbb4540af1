#pragma once
// Methods is the JSON-RPC 2.0 dispatcher: one request line (or batch) from a
// peer in, the reply line out (nullopt for notifications). It validates the
// envelope and every parameter and answers errors with the codes JSON-RPC 2.0
// defines (-32700 parse, -32600 invalid request, -32601 no such method, -32602
// bad params, -32603 internal) and our own (-32001 store unavailable, -32002
// authentication required, -32003 cut off, -32004 control refused, -32005 too
// many clients, -32006 closed, -32007 control unconfirmed). It never throws.
// Methods and fields are in docs/api.md.
//
// Replies go to a callback, called exactly once per request line: at once for
// most methods, later for the board commands (reset_now, zero_start,
// zero_stop), whose reply waits for the board's acknowledgement (Control
// completes them from the command's completion, on the Asio thread). A batch
// is answered once its slowest part is. Nothing of the Peer is used after the
// call returns; a reply that comes later must be dropped by the caller's
// callback when its connection is gone.
// Runs on the Asio thread; it owns its two read-only store connections.
#include <functional>
#include <memory>
#include <optional>
#include <string>

#include <nlohmann/json.hpp>

#include "daemon/api/control.hpp"
#include "daemon/api/hub.hpp"
#include "daemon/api/reprocessor.hpp"
#include "daemon/api/reply.hpp"
#include "daemon/api/sink.hpp"
#include "daemon/api/store_queries.hpp"
#include "storage/reader.hpp"

namespace accrue::daemon::api {

namespace rpc_error {
inline constexpr int parse_error = -32700;
inline constexpr int invalid_request = -32600;
inline constexpr int method_not_found = -32601;
inline constexpr int invalid_params = -32602;
inline constexpr int internal_error = -32603;
inline constexpr int store_unavailable = -32001;
inline constexpr int auth_required = -32002;
inline constexpr int cut_off = -32003;
inline constexpr int control_refused = -32004;
inline constexpr int too_many_clients = -32005;
inline constexpr int timed_out = -32006;
inline constexpr int control_unconfirmed = -32007;  // a board command sent but never acknowledged
}  // namespace rpc_error

nlohmann::json error_reply(const nlohmann::json& id, int code, const std::string& message);

// What Methods knows of the connection a request came on.
struct Peer {
  bool authenticated = true;       // false on TCP until "authenticate" succeeds
  bool close_after_reply = false;  // set by Methods: the server closes after this reply
  std::weak_ptr<Sink> sink;        // for subscriptions
  const Sink* sink_ptr = nullptr;
};

struct MethodSettings {
  std::size_t page_points = 5000;  // points per window reply; more come by continuation
  std::size_t page_rows = 1000;    // default (and cap 10x) for segments and events
  std::string tcp_token;           // what "authenticate" compares against
};

class Methods {
 public:
  using StatusSource = std::function<nlohmann::json()>;
  // The serialized reply line, or nullopt when nothing is to be sent (notifications).
  using Respond = std::function<void(std::optional<std::string>)>;
  using Finish = std::function<void(std::optional<Reply>)>;
  // `database` is opened read-only on first use, so the daemon starts before the file has data.
  // `control` may be null (then control methods answer -32004).
  Methods(std::string database, StatusSource status, Hub& hub, Control* control, MethodSettings settings = {});
  // A whole request line: parses it and dispatches; `respond` is called once.
  void handle_line(std::string_view line, Peer& peer, Respond respond);
  // One request or a batch; `finish` is called once.
  void handle(const nlohmann::json& request, Peer& peer, Finish finish);
  // Enables "reprocess" (otherwise it answers -32004); not owned, may be null.
  void set_reprocessor(Reprocessor* reprocessor) { reprocessor_ = reprocessor; }

 private:
  using Later = std::function<void(Reply)>;
  // One request object: what to send when known at once (nullopt: nothing),
  // or `deferred` set when `finish` was taken and is (or already was) called.
  std::optional<Reply> single(const nlohmann::json& request, Peer& peer, const Finish& finish, bool& deferred);
  std::optional<Reply> call(const std::string& method, const nlohmann::json& params, const nlohmann::json& id, Peer& peer,
                            const Later& later);
  // reset_now, zero_start, zero_stop: the reply goes to `later` once the board has answered.
  std::optional<Reply> board_command(const std::string& method, const nlohmann::json& params, const nlohmann::json& id,
                                     const Later& later);
  nlohmann::json totals(const nlohmann::json& id);
  nlohmann::json runs(const nlohmann::json& id);
  nlohmann::json channels(const nlohmann::json& id);
  nlohmann::json calibration(const nlohmann::json& params, const nlohmann::json& id);
  Reply window(const nlohmann::json& params, const nlohmann::json& id);
  nlohmann::json segments(const nlohmann::json& params, const nlohmann::json& id);
  nlohmann::json events(const nlohmann::json& params, const nlohmann::json& id);
  nlohmann::json control(const std::string& method, const nlohmann::json& params, const nlohmann::json& id);
  nlohmann::json subscribe(const nlohmann::json& params, const nlohmann::json& id, Peer& peer);
  nlohmann::json unsubscribe(const nlohmann::json& params, const nlohmann::json& id, Peer& peer);
  bool open_store(std::string& why);
  // The run a request names (run_id) or the newest; false with an error reply.
  bool resolve_run(const nlohmann::json& params, const nlohmann::json& id, storage::RunInfo& run, nlohmann::json& err);
  // The derivation of `run` a request names ("derivation") or the newest readable; false with an error reply.
  bool resolve_derivation(const nlohmann::json& params, const nlohmann::json& id, const storage::RunInfo& run,
                          int& derivation, nlohmann::json& err);
  // methods_derivations.cpp
  nlohmann::json run_totals(const nlohmann::json& params, const nlohmann::json& id);
  nlohmann::json derivations(const nlohmann::json& params, const nlohmann::json& id);
  nlohmann::json reprocess(const nlohmann::json& params, const nlohmann::json& id, Peer& peer);

  std::string database_;
  StatusSource status_;
  Hub& hub_;
  Control* control_;
  MethodSettings settings_;
  std::unique_ptr<storage::Reader> reader_;
  std::unique_ptr<StoreQueries> queries_;
  Reprocessor* reprocessor_ = nullptr;
};

}  // namespace accrue::daemon::api
