#include "daemon/api/methods.hpp"

#include <cmath>
#include <set>

#include "storage/utc.hpp"

namespace accrue::daemon::api {

using nlohmann::json;

json error_reply(const json& id, int code, const std::string& message) {
  return {{"jsonrpc", "2.0"}, {"error", {{"code", code}, {"message", message}}}, {"id", id}};
}

namespace {

json result_reply(const json& id, json result) { return {{"jsonrpc", "2.0"}, {"result", std::move(result)}, {"id", id}}; }

struct ParamError {
  std::string message;
};

// Reads an optional index-or-time bound: a sample index (integer), Unix
// seconds (number with "_unix" suffix key) or RFC 3339 text.
std::optional<std::uint64_t> index_bound(const json& params, const char* key, const storage::RunInfo& run,
                                         std::optional<ParamError>& err) {
  if (!params.contains(key)) return std::nullopt;
  const json& v = params[key];
  double unix_s = 0;
  if (v.is_number_unsigned() || (v.is_number_integer() && v.get<long long>() >= 0)) return v.get<std::uint64_t>();
  if (v.is_string()) {
    auto t = storage::parse_rfc3339(v.get<std::string>());
    if (!t) {
      err = ParamError{std::string(key) + " must be a sample index, Unix seconds or RFC 3339 time"};
      return std::nullopt;
    }
    unix_s = *t;
  } else if (v.is_number_float()) {
    unix_s = v.get<double>();
  } else {
    err = ParamError{std::string(key) + " must be a sample index, Unix seconds or RFC 3339 time"};
    return std::nullopt;
  }
  const double index = (unix_s - run.utc_at_index0) / run.sample_period_s;
  if (!std::isfinite(index)) {
    err = ParamError{std::string(key) + " is out of range"};
    return std::nullopt;
  }
  return index <= 0 ? 0 : std::uint64_t(std::min(index, 1.8e19));
}

}  // namespace

Methods::Methods(std::string database, StatusSource status) : database_(std::move(database)), status_(std::move(status)) {}

storage::Reader* Methods::reader(std::string& why) {
  if (!reader_) {
    if (storage::Status s = storage::Reader::open(database_, reader_); !s.ok()) {
      why = s.message;
      reader_.reset();
      return nullptr;
    }
  }
  return reader_.get();
}

std::optional<std::string> Methods::handle_line(std::string_view line) {
  const json request = json::parse(line.begin(), line.end(), nullptr, false);
  if (request.is_discarded()) return error_reply(nullptr, rpc_error::parse_error, "Parse error: not valid JSON").dump();
  auto reply = handle(request);
  if (!reply) return std::nullopt;
  // Invalid UTF-8 cannot reach here (the parser rejects it); replace to be safe.
  return reply->dump(-1, ' ', false, json::error_handler_t::replace);
}

std::optional<json> Methods::handle(const json& request) {
  if (request.is_array()) {
    if (request.empty()) return error_reply(nullptr, rpc_error::invalid_request, "Invalid Request: empty batch");
    json replies = json::array();
    for (const auto& r : request) {
      if (r.is_array()) {
        replies.push_back(error_reply(nullptr, rpc_error::invalid_request, "Invalid Request: nested batch"));
        continue;
      }
      if (auto reply = handle(r)) replies.push_back(std::move(*reply));
    }
    if (replies.empty()) return std::nullopt;
    return replies;
  }
  if (!request.is_object()) return error_reply(nullptr, rpc_error::invalid_request, "Invalid Request: not an object");
  json id = nullptr;
  const bool has_id = request.contains("id");
  if (has_id) {
    id = request["id"];
    if (!(id.is_null() || id.is_string() || id.is_number()))
      return error_reply(nullptr, rpc_error::invalid_request, "Invalid Request: id must be a string, number or null");
  }
  if (!request.contains("jsonrpc") || request["jsonrpc"] != "2.0")
    return error_reply(id, rpc_error::invalid_request, "Invalid Request: jsonrpc must be \"2.0\"");
  if (!request.contains("method") || !request["method"].is_string())
    return error_reply(id, rpc_error::invalid_request, "Invalid Request: method must be a string");
  json params = json::object();
  if (request.contains("params")) {
    params = request["params"];
    if (!params.is_object() && !params.is_array())
      return error_reply(id, rpc_error::invalid_request, "Invalid Request: params must be an object or array");
    if (params.is_array()) {
      if (!params.empty()) return error_reply(id, rpc_error::invalid_params, "Invalid params: pass params by name");
      params = json::object();
    }
  }
  json reply = call(request["method"].get<std::string>(), params, id);
  if (!has_id) return std::nullopt;  // a notification gets no reply, even an error
  return reply;
}

json Methods::call(const std::string& method, const json& params, const json& id) {
  if (method == "status") return result_reply(id, status_());
  if (method == "totals") return totals(id);
  if (method == "runs") return runs(id);
  if (method == "window") return window(params, id);
  return error_reply(id, rpc_error::method_not_found, "Method not found: " + method);
}

json Methods::totals(const json& id) {
  std::string why;
  storage::Reader* r = reader(why);
  if (!r) return error_reply(id, rpc_error::store_unavailable, "store unavailable: " + why);
  std::vector<storage::CheckpointRow> rows;
  if (storage::Status s = r->checkpoints(rows); !s.ok())
    return error_reply(id, rpc_error::store_unavailable, "store unavailable: " + s.message);
  json out = json::array();
  for (const auto& c : rows) {
    out.push_back({{"channel", c.channel},
                   {"run_id", c.run_id},
                   {"quantity", c.quantity},
                   {"unit", c.unit},
                   {"total", c.total},
                   {"std_uncertainty", c.std_uncertainty},
                   {"expanded_uncertainty_k2", 2.0 * c.std_uncertainty},
                   {"stitched_uncorrected", c.state.stitched_uncorrected_v * c.quantity_per_volt},
                   {"quantity_per_volt", c.quantity_per_volt},
                   {"segments", c.segments},
                   {"flags", c.flags},
                   {"last_index", c.last_index},
                   {"calibration_id", c.calibration_id},
                   {"committed_utc", c.committed_utc}});
  }
  return result_reply(id, {{"channels", out}});
}

json Methods::runs(const json& id) {
  std::string why;
  storage::Reader* r = reader(why);
  if (!r) return error_reply(id, rpc_error::store_unavailable, "store unavailable: " + why);
  std::vector<storage::RunInfo> rows;
  if (storage::Status s = r->runs(rows); !s.ok())
    return error_reply(id, rpc_error::store_unavailable, "store unavailable: " + s.message);
  json out = json::array();
  for (const auto& run : rows) {
    out.push_back({{"run_id", run.run_id},
                   {"board_serial", run.board_serial},
                   {"sample_period_s", run.sample_period_s},
                   {"started_utc", run.started_utc},
                   {"ended_utc", run.ended_utc.empty() ? json(nullptr) : json(run.ended_utc)},
                   {"end_reason", run.end_reason}});
  }
  return result_reply(id, {{"runs", out}});
}

json Methods::window(const json& params, const json& id) {
  static const std::set<std::string> known = {"channel", "run_id", "from", "to", "max_points"};
  for (auto it = params.begin(); it != params.end(); ++it)
    if (!known.count(it.key())) return error_reply(id, rpc_error::invalid_params, "Invalid params: unknown " + it.key());
  storage::WindowQuery q;
  if (params.contains("channel")) {
    if (!params["channel"].is_number_integer() || params["channel"].get<long long>() < 0 ||
        params["channel"].get<long long>() > 254)
      return error_reply(id, rpc_error::invalid_params, "Invalid params: channel must be 0..254");
    q.channel = params["channel"].get<int>();
  }
  if (params.contains("run_id")) {
    if (!params["run_id"].is_number_integer())
      return error_reply(id, rpc_error::invalid_params, "Invalid params: run_id must be an integer");
    q.run_id = params["run_id"].get<std::int64_t>();
  }
  if (params.contains("max_points")) {
    if (!params["max_points"].is_number_integer() || params["max_points"].get<long long>() < 1 ||
        params["max_points"].get<long long>() > 100000)
      return error_reply(id, rpc_error::invalid_params, "Invalid params: max_points must be 1..100000");
    q.max_points = params["max_points"].get<std::size_t>();
  }
  std::string why;
  storage::Reader* r = reader(why);
  if (!r) return error_reply(id, rpc_error::store_unavailable, "store unavailable: " + why);
  // Resolve the run first so that times can become sample indices.
  storage::WindowResult probe;
  storage::WindowQuery run_only = q;
  run_only.from_index = 1;
  run_only.to_index = 0;  // empty range: only the run is looked up
  if (storage::Status s = r->window(run_only, probe); !s.ok())
    return error_reply(id, rpc_error::invalid_params, "Invalid params: " + s.message);
  std::optional<ParamError> err;
  if (auto from = index_bound(params, "from", probe.run, err)) q.from_index = *from;
  if (auto to = index_bound(params, "to", probe.run, err)) q.to_index = *to;
  if (err) return error_reply(id, rpc_error::invalid_params, "Invalid params: " + err->message);
  storage::WindowResult w;
  if (storage::Status s = r->window(q, w); !s.ok())
    return error_reply(id, rpc_error::store_unavailable, "store unavailable: " + s.message);
  json points = json::array();
  for (const auto& p : w.points) {
    points.push_back({{"index", p.first_index}, {"utc", storage::rfc3339_utc(p.utc)}, {"samples", p.samples},
                      {"mean_v", p.mean_v}, {"min_v", p.min_v}, {"max_v", p.max_v}, {"last_v", p.last_v},
                      {"total", p.total}, {"total_u", p.total_u}});
  }
  return result_reply(id, {{"run_id", w.run.run_id},
                           {"channel", q.channel},
                           {"quantity", w.quantity},
                           {"unit", w.unit},
                           {"sample_period_s", w.run.sample_period_s},
                           {"points", points}});
}

}  // namespace accrue::daemon::api
