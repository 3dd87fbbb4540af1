#include "daemon/api/methods.hpp"

#include <cmath>
#include <cstdio>
#include <set>

#include "daemon/api/token.hpp"
#include "daemon/api/utf8.hpp"
#include "daemon/api/window_text.hpp"
#include "storage/chain_settings_json.hpp"
#include "storage/utc.hpp"

namespace accrue::daemon::api {

using nlohmann::json;

json error_reply(const json& id, int code, const std::string& message) {
  return {{"jsonrpc", "2.0"}, {"error", {{"code", code}, {"message", message}}}, {"id", id}};
}

namespace {

json result_reply(const json& id, json result) { return {{"jsonrpc", "2.0"}, {"result", std::move(result)}, {"id", id}}; }
json bad_params(const json& id, const std::string& why) {
  return error_reply(id, rpc_error::invalid_params, "Invalid params: " + why);
}
// A control request's reply: the result, or its error with the detail as data.
json control_reply(const json& id, const ControlResult& r) {
  if (r.ok) return result_reply(id, r.detail);
  if (r.bad_params) return bad_params(id, r.message);
  json e = r.no_answer ? error_reply(id, rpc_error::control_unconfirmed, "control unconfirmed: " + r.message)
                       : error_reply(id, rpc_error::control_refused, "control refused: " + r.message);
  if (r.detail.is_object() && !r.detail.empty()) e["error"]["data"] = r.detail;
  return e;
}
json store_error(const json& id, const std::string& why) {
  return error_reply(id, rpc_error::store_unavailable, "store unavailable: " + why);
}

// Checks that params holds only `known` keys; the first unknown is named.
std::optional<std::string> unknown_key(const json& params, std::initializer_list<const char*> known) {
  for (auto it = params.begin(); it != params.end(); ++it) {
    bool found = false;
    for (const char* k : known) found = found || it.key() == k;
    if (!found) return "unknown parameter " + it.key();
  }
  return std::nullopt;
}

// An integer parameter in [min, max]; `err` set when present but wrong.
std::optional<long long> int_param(const json& params, const char* key, long long min, long long max, std::string& err) {
  if (!params.contains(key)) return std::nullopt;
  const json& v = params[key];
  if (!v.is_number_integer() || v.get<long long>() < min || (v.is_number_unsigned() && v.get<unsigned long long>() > (unsigned long long)max) ||
      v.get<long long>() > max) {
    err = std::string(key) + " must be a whole number " + std::to_string(min) + ".." + std::to_string(max);
    return std::nullopt;
  }
  return v.get<long long>();
}

// A bound given as a sample index (whole number), Unix seconds (number with a
// fraction) or RFC 3339 text. Times become the nearest sample index of `run`.
std::optional<std::uint64_t> index_bound(const json& params, const char* key, const storage::RunInfo& run, std::string& err) {
  if (!params.contains(key)) return std::nullopt;
  const json& v = params[key];
  double unix_s = 0;
  if (v.is_number_unsigned() || (v.is_number_integer() && v.get<long long>() >= 0)) return v.get<std::uint64_t>();
  if (v.is_string()) {
    auto t = storage::parse_rfc3339(v.get<std::string>());
    if (!t) {
      err = std::string(key) + " must be a sample index, Unix seconds or RFC 3339 time";
      return std::nullopt;
    }
    unix_s = *t;
  } else if (v.is_number_float()) {
    unix_s = v.get<double>();
  } else {
    err = std::string(key) + " must be a sample index, Unix seconds or RFC 3339 time";
    return std::nullopt;
  }
  const double index = (unix_s - run.utc_at_index0) / run.sample_period_s;
  if (!std::isfinite(index)) {
    err = std::string(key) + " is out of range";
    return std::nullopt;
  }
  return index <= 0 ? 0 : std::uint64_t(std::min(std::round(index), 9.2e18));
}

// A host-time bound for events: RFC 3339 text or Unix seconds, as RFC 3339 text.
std::optional<std::string> time_bound(const json& params, const char* key, std::string& err) {
  if (!params.contains(key)) return std::nullopt;
  const json& v = params[key];
  std::optional<double> t;
  if (v.is_string()) t = storage::parse_rfc3339(v.get<std::string>());
  else if (v.is_number_float()) t = v.get<double>();
  if (!t || !std::isfinite(*t) || *t < 0 || *t > 253402300799.0) {
    err = std::string(key) + " must be RFC 3339 text or Unix seconds with a fraction";
    return std::nullopt;
  }
  return storage::rfc3339_utc(*t);
}

constexpr std::size_t kMaxSubscriptionsPerClient = 64;
const std::set<std::string> kSelects = {"all", "volts", "quantity", "total", "rate"};

// Continuation of a window: everything the next page needs, as plain text.
struct WindowCursor {
  std::int64_t run_id = 0;
  int derivation = 0;  // 0: a w1 token, from before derivations (the newest is read)
  int channel = 0;
  std::uint64_t lo = 0, hi = 0, bucket = 1, next = 0;
  std::string select = "all";
};
std::string encode(const WindowCursor& c) {
  return "w2." + std::to_string(c.run_id) + "." + std::to_string(c.derivation) + "." + std::to_string(c.channel) + "." +
         std::to_string(c.lo) + "." +
         std::to_string(c.hi) + "." + std::to_string(c.bucket) + "." + std::to_string(c.next) + "." + c.select;
}
std::optional<WindowCursor> decode(const std::string& text) {
  WindowCursor c;
  long long run = 0;
  int ch = 0, used = 0;
  unsigned long long lo = 0, hi = 0, bucket = 0, next = 0;
  char select[16] = {0};
  int derivation = 0;
  if (std::sscanf(text.c_str(), "w2.%lld.%d.%d.%llu.%llu.%llu.%llu.%15[a-z]%n", &run, &derivation, &ch, &lo, &hi, &bucket,
                  &next, select, &used) == 8 &&
      std::size_t(used) == text.size() && derivation > 0) {
    c.derivation = derivation;
  } else if (std::sscanf(text.c_str(), "w1.%lld.%d.%llu.%llu.%llu.%llu.%15[a-z]%n", &run, &ch, &lo, &hi, &bucket, &next,
                         select, &used) != 7 ||
             std::size_t(used) != text.size()) {
    return std::nullopt;
  }
  c.run_id = run, c.channel = ch, c.lo = lo, c.hi = hi, c.bucket = bucket, c.next = next, c.select = select;
  if (!kSelects.count(c.select) || c.bucket == 0 || c.lo > c.hi || c.next < c.lo || c.next > c.hi || ch < 0 || ch > 254)
    return std::nullopt;
  return c;
}

}  // namespace

Methods::Methods(std::string database, StatusSource status, Hub& hub, Control* control, MethodSettings settings)
    : database_(std::move(database)), status_(std::move(status)), hub_(hub), control_(control), settings_(std::move(settings)) {}

bool Methods::open_store(std::string& why) {
  if (!reader_) {
    if (storage::Status s = storage::Reader::open(database_, reader_); !s.ok()) {
      why = s.message;
      reader_.reset();
      return false;
    }
  }
  if (!queries_) {
    if (storage::Status s = StoreQueries::open(database_, queries_); !s.ok()) {
      why = s.message;
      queries_.reset();
      return false;
    }
  }
  return true;
}

namespace {

// A batch's replies, in request order, sent once its last part is answered.
struct Batch {
  std::vector<std::optional<json>> parts;
  std::size_t waiting = 0;
  Methods::Finish finish;
  void part_done() {
    if (--waiting > 0) return;
    json replies = json::array();
    for (auto& p : parts)
      if (p) replies.push_back(std::move(*p));
    if (replies.empty()) finish(std::nullopt);
    else finish(Reply(std::move(replies)));
  }
};

}  // namespace

void Methods::handle_line(std::string_view line, Peer& peer, Respond respond) {
  if (auto bad = first_invalid_utf8(line)) {
    respond(error_reply(nullptr, rpc_error::parse_error, "Parse error: invalid UTF-8 at byte " + std::to_string(*bad)).dump());
    return;
  }
  const json request = json::parse(line.begin(), line.end(), nullptr, false);
  if (request.is_discarded()) {
    respond(error_reply(nullptr, rpc_error::parse_error, "Parse error: not valid JSON").dump());
    return;
  }
  handle(request, peer, [respond = std::move(respond)](std::optional<Reply> reply) {
    if (!reply) respond(std::nullopt);
    else respond(std::move(*reply).dump());
  });
}

void Methods::handle(const json& request, Peer& peer, Finish finish) {
  if (!request.is_array()) {
    bool deferred = false;
    std::optional<Reply> reply = single(request, peer, finish, deferred);
    if (!deferred) finish(std::move(reply));
    return;
  }
  if (request.empty()) {
    finish(Reply(error_reply(nullptr, rpc_error::invalid_request, "Invalid Request: empty batch")));
    return;
  }
  auto batch = std::make_shared<Batch>();
  batch->parts.resize(request.size());
  batch->waiting = request.size() + 1;  // + 1: not finished while parts are still being handed out
  batch->finish = std::move(finish);
  for (std::size_t i = 0; i < request.size(); ++i) {
    if (request[i].is_array()) {
      batch->parts[i] = error_reply(nullptr, rpc_error::invalid_request, "Invalid Request: nested batch");
      batch->part_done();
      continue;
    }
    handle(request[i], peer, [batch, i](std::optional<Reply> reply) {
      if (reply) batch->parts[i] = std::move(*reply).to_json();
      batch->part_done();
    });
  }
  batch->part_done();
}

std::optional<Reply> Methods::single(const json& request, Peer& peer, const Finish& finish, bool& deferred) {
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
      if (!params.empty()) return bad_params(id, "pass params by name");
      params = json::object();
    }
  }
  const std::string method = request["method"].get<std::string>();
  if (!peer.authenticated && method != "authenticate") {
    // A TCP peer that does not start with its token is refused and disconnected.
    peer.close_after_reply = true;
    return error_reply(id, rpc_error::auth_required, "authentication required: call authenticate with the token first");
  }
  // A notification gets no reply, even an error (close_after_reply is only
  // ever set at once, by authenticate, never by a deferred method).
  std::optional<Reply> reply = call(method, params, id, peer, [finish, has_id](Reply r) {
    finish(has_id ? std::optional<Reply>(std::move(r)) : std::nullopt);
  });
  if (!reply) {
    deferred = true;
    return std::nullopt;
  }
  if (!has_id && !peer.close_after_reply) return std::nullopt;
  return reply;
}

std::optional<Reply> Methods::call(const std::string& method, const json& params, const json& id, Peer& peer,
                                   const Later& later) {
  if (method == "authenticate") {
    if (auto k = unknown_key(params, {"token"})) return bad_params(id, *k);
    if (!params.contains("token") || !params["token"].is_string()) return bad_params(id, "token must be a string");
    if (peer.authenticated) return result_reply(id, {{"authenticated", true}});
    if (!tokens_equal(settings_.tcp_token, params["token"].get<std::string>())) {
      peer.close_after_reply = true;
      return error_reply(id, rpc_error::auth_required, "authentication failed: wrong token");
    }
    peer.authenticated = true;
    return result_reply(id, {{"authenticated", true}});
  }
  if (method == "status") {
    if (auto k = unknown_key(params, {})) return bad_params(id, *k);
    return result_reply(id, status_());
  }
  if (method == "totals") {
    if (auto k = unknown_key(params, {"run_id", "derivation"})) return bad_params(id, *k);
    if (!params.empty()) return run_totals(params, id);
    return totals(id);
  }
  if (method == "derivations") return derivations(params, id);
  if (method == "reprocess") return reprocess(params, id, peer);
  if (method == "runs") {
    if (auto k = unknown_key(params, {})) return bad_params(id, *k);
    return runs(id);
  }
  if (method == "channels") {
    if (auto k = unknown_key(params, {})) return bad_params(id, *k);
    return channels(id);
  }
  if (method == "calibration") return calibration(params, id);
  if (method == "window") return window(params, id);
  if (method == "segments") return segments(params, id);
  if (method == "events") return events(params, id);
  if (method == "reset_now" || method == "zero_start" || method == "zero_stop")
    return board_command(method, params, id, later);
  if (method == "quiet_mark" || method == "calibration_new") return control(method, params, id);
  if (method == "subscribe") return subscribe(params, id, peer);
  if (method == "unsubscribe") return unsubscribe(params, id, peer);
  return error_reply(id, rpc_error::method_not_found, "Method not found: " + method);
}

json Methods::totals(const json& id) {
  std::string why;
  if (!open_store(why)) return store_error(id, why);
  std::vector<storage::CheckpointRow> rows;
  if (storage::Status s = reader_->checkpoints(rows); !s.ok()) return store_error(id, s.message);
  json out = json::array();
  for (const auto& c : rows) {
    // Queries read the newest derivation: a reprocessed one stands in for the recording's.
    int derivation = 1;
    if (storage::Status s = reader_->resolve_derivation(c.run_id, std::nullopt, derivation); s.ok() && derivation != 1) {
      json one = run_totals(json{{"run_id", c.run_id}, {"derivation", derivation}}, id);
      if (one.contains("result"))
        for (const auto& ch : one["result"]["channels"])
          if (ch.value("channel", -1) == c.channel) out.push_back(ch);
      continue;
    }
    out.push_back({{"channel", c.channel},
                   {"derivation", 1},
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
  if (!open_store(why)) return store_error(id, why);
  std::vector<storage::RunInfo> rows;
  if (storage::Status s = reader_->runs(rows); !s.ok()) return store_error(id, s.message);
  json out = json::array();
  for (const auto& run : rows) {
    out.push_back({{"run_id", run.run_id},
                   {"board_serial", run.board_serial},
                   {"sample_period_s", run.sample_period_s},
                   {"utc_at_index0", run.utc_at_index0},
                   {"started_utc", run.started_utc},
                   {"ended_utc", run.ended_utc.empty() ? json(nullptr) : json(run.ended_utc)},
                   {"end_reason", run.end_reason}});
  }
  return result_reply(id, {{"runs", out}});
}

namespace {
json calibration_json(const CalibrationRow& c) {
  json def = json::parse(c.definition, nullptr, false);
  if (def.is_discarded()) def = c.definition;
  return {{"calibration_id", c.calibration_id}, {"channel", c.channel},   {"created_utc", c.created_utc},
          {"quantity", c.quantity},             {"unit", c.unit},         {"quantity_per_volt", c.quantity_per_volt},
          {"definition", def}};
}
}  // namespace

json Methods::channels(const json& id) {
  std::string why;
  if (!open_store(why)) return store_error(id, why);
  std::vector<CalibrationRow> cals;
  if (storage::Status s = queries_->calibrations(std::nullopt, cals); !s.ok()) return store_error(id, s.message);
  const json status = status_();
  std::map<int, json> live;
  if (status.contains("run") && status["run"].is_object())
    for (const auto& ch : status["run"]["channels"]) live[ch.value("channel", -1)] = ch;
  std::map<int, json> out;
  for (const auto& c : cals) {
    json& ch = out[c.channel];
    const int versions = ch.is_object() ? ch.value("calibration_versions", 0) : 0;
    ch = {{"channel", c.channel}, {"calibration", calibration_json(c)}, {"calibration_versions", versions + 1}};
  }
  for (const auto& [channel, l] : live)
    if (!out.count(channel)) out[channel] = {{"channel", channel}, {"calibration", nullptr}, {"calibration_versions", 0}};
  json list = json::array();
  for (auto& [channel, ch] : out) {
    ch["live"] = live.count(channel) ? live[channel] : json(nullptr);
    list.push_back(ch);
  }
  return result_reply(id, {{"channels", list}});
}

json Methods::calibration(const json& params, const json& id) {
  if (auto k = unknown_key(params, {"channel"})) return bad_params(id, *k);
  std::string err;
  auto channel = int_param(params, "channel", 0, 254, err);
  if (!err.empty()) return bad_params(id, err);
  std::string why;
  if (!open_store(why)) return store_error(id, why);
  std::vector<CalibrationRow> cals;
  if (storage::Status s = queries_->calibrations(channel ? std::optional<int>(int(*channel)) : std::nullopt, cals); !s.ok())
    return store_error(id, s.message);
  json list = json::array();
  for (const auto& c : cals) list.push_back(calibration_json(c));
  return result_reply(id, {{"versions", list}});
}

bool Methods::resolve_run(const json& params, const json& id, storage::RunInfo& run, json& err) {
  std::string why;
  auto run_id = int_param(params, "run_id", 1, INT64_MAX, why);
  if (!why.empty()) {
    err = bad_params(id, why);
    return false;
  }
  if (!open_store(why)) {
    err = store_error(id, why);
    return false;
  }
  std::vector<storage::RunInfo> runs;
  if (storage::Status s = reader_->runs(runs); !s.ok()) {
    err = store_error(id, s.message);
    return false;
  }
  for (const auto& r : runs)
    if (!run_id || r.run_id == *run_id) run = r;  // the newest when none is named
  if (runs.empty() || (run_id && run.run_id != *run_id)) {
    err = bad_params(id, run_id ? "no such run " + std::to_string(*run_id) : "no runs recorded yet");
    return false;
  }
  return true;
}

Reply Methods::window(const json& params, const json& id) {
  if (auto k = unknown_key(params, {"channel", "run_id", "derivation", "from", "to", "max_points", "select", "continuation"}))
    return bad_params(id, *k);
  WindowCursor cursor;
  std::size_t max_points = 1000;
  std::optional<std::uint64_t> start;
  storage::RunInfo run;
  json err;
  if (params.contains("continuation")) {
    if (params.size() != 1) return bad_params(id, "continuation stands alone: the token carries the rest");
    if (!params["continuation"].is_string()) return bad_params(id, "continuation must be a string");
    auto c = decode(params["continuation"].get<std::string>());
    if (!c) return bad_params(id, "continuation is not a token this daemon gave out");
    cursor = *c;
    start = cursor.next;
    if (!resolve_run(json{{"run_id", cursor.run_id}}, id, run, err)) return err;
    const json named = cursor.derivation ? json{{"derivation", cursor.derivation}} : json::object();
    if (!resolve_derivation(named, id, run, cursor.derivation, err)) return err;
  } else {
    std::string why;
    auto channel = int_param(params, "channel", 0, 254, why);
    auto points = int_param(params, "max_points", 1, 1000000, why);
    if (!why.empty()) return bad_params(id, why);
    if (params.contains("select") && (!params["select"].is_string() || !kSelects.count(params["select"].get<std::string>())))
      return bad_params(id, "select must be one of all, volts, quantity, total, rate");
    cursor.select = params.value("select", "all");
    cursor.channel = int(channel.value_or(0));
    max_points = std::size_t(points.value_or(1000));
    if (!resolve_run(params, id, run, err)) return err;
    cursor.run_id = run.run_id;
    if (!resolve_derivation(params, id, run, cursor.derivation, err)) return err;
    cursor.lo = index_bound(params, "from", run, why).value_or(0);
    cursor.hi = index_bound(params, "to", run, why).value_or(INT64_MAX);
    if (!why.empty()) return bad_params(id, why);
    if (cursor.lo > cursor.hi) return bad_params(id, "from is after to");
    cursor.bucket = 0;
  }
  WindowPage page;
  if (storage::Status s = queries_->window_page(cursor.run_id, cursor.channel, cursor.lo, cursor.hi, max_points,
                                                settings_.page_points, cursor.bucket, start, page, cursor.derivation);
      !s.ok())
    return store_error(id, s.message);
  const std::string& sel = cursor.select;
  const bool all = sel == "all";
  json cont = nullptr;
  if (page.next_start) {
    WindowCursor next = cursor;
    next.lo = page.lo, next.hi = page.hi, next.bucket = page.bucket_samples, next.next = *page.next_start;
    cont = encode(next);
  }
  const json result = {{"run_id", run.run_id},
                       {"derivation", cursor.derivation},
                       {"channel", cursor.channel},
                       {"select", sel},
                       {"quantity", page.quantity},
                       {"unit", page.unit},
                       {"rate_unit", page.unit.empty() ? "" : page.unit + "/s"},
                       {"sample_period_s", run.sample_period_s},
                       {"bucket_samples", page.bucket_samples},
                       {"from_index", page.lo},
                       {"to_index", page.hi},
                       {"total_interpolated", page.from_raw},
                       {"continuation", cont}};
  // The points go in as text (see window_text.hpp); the rest is small. Keys
  // keep json::dump()'s sorted order: "points" falls between "from_index" and
  // "quantity", and the envelope is id, jsonrpc, result.
  json head = json::object(), tail = json::object();
  for (const auto& [key, value] : result.items()) (key < "points" ? head : tail)[key] = value;
  std::string text = "{\"id\":" + id.dump() + ",\"jsonrpc\":\"2.0\",\"result\":";
  std::string h = head.dump(-1, ' ', false, json::error_handler_t::replace);
  h.pop_back();  // the closing brace: the points and the tail follow
  text += h;
  text += ",\"points\":";
  append_window_points(text, page, run.utc_at_index0, run.sample_period_s,
                       {.volts = all || sel == "volts", .total = all || sel == "total",
                        .quantity = all || sel == "quantity", .rate = all || sel == "rate"});
  std::string t = tail.dump(-1, ' ', false, json::error_handler_t::replace);
  t.front() = ',';  // the opening brace: these keys continue the same object
  text += t;
  text += '}';
  return Reply::serialized(std::move(text));
}

json Methods::segments(const json& params, const json& id) {
  if (auto k = unknown_key(params, {"channel", "run_id", "derivation", "from", "to", "after", "limit"}))
    return bad_params(id, *k);
  std::string why;
  auto channel = int_param(params, "channel", 0, 254, why);
  auto after = int_param(params, "after", 0, INT64_MAX, why);
  auto limit = int_param(params, "limit", 1, (long long)settings_.page_rows * 10, why);
  if (!why.empty()) return bad_params(id, why);
  storage::RunInfo run;
  json err;
  if (!resolve_run(params, id, run, err)) return err;
  int derivation = 1;
  if (!resolve_derivation(params, id, run, derivation, err)) return err;
  const std::uint64_t from = index_bound(params, "from", run, why).value_or(0);
  const std::uint64_t to = index_bound(params, "to", run, why).value_or(INT64_MAX);
  if (!why.empty()) return bad_params(id, why);
  const std::size_t n = std::size_t(limit.value_or((long long)settings_.page_rows));
  std::vector<SegmentRow> rows;
  if (storage::Status s = queries_->segments(run.run_id, int(channel.value_or(0)), from, to, after.value_or(0), n + 1, rows,
                                             derivation);
      !s.ok())
    return store_error(id, s.message);
  const bool more = rows.size() > n;
  if (more) rows.pop_back();
  json list = json::array();
  for (const auto& s : rows) {
    list.push_back({{"ordinal", s.ordinal},
                    {"first_index", s.first_index},
                    {"last_index", s.last_index},
                    {"start_utc", storage::rfc3339_utc(run.utc_at_index0 + double(s.first_index) * run.sample_period_s)},
                    {"length_s", double(s.last_index - s.first_index) * run.sample_period_s},
                    {"start_v", s.start_v},
                    {"end_v", s.end_v},
                    {"drift_v", s.drift_v},
                    {"gap_before_v", s.gap_before_v},
                    {"gap_before_u_v", s.gap_before_u_v},
                    {"end_points_u_v", s.end_points_u_v},
                    {"quantity", s.quantity},
                    {"baseline_ordinal", s.baseline_ordinal},
                    {"flags", s.flags},
                    {"total_after", s.total_after},
                    {"total_u_after", s.total_u_after},
                    {"calibration_id", s.calibration_id}});
  }
  return result_reply(id, {{"run_id", run.run_id},
                           {"derivation", derivation},
                           {"channel", channel.value_or(0)},
                           {"segments", list},
                           {"next_after", more ? json(rows.back().ordinal) : json(nullptr)}});
}

json Methods::events(const json& params, const json& id) {
  if (auto k = unknown_key(params, {"run_id", "channel", "kind", "from", "to", "after", "limit"})) return bad_params(id, *k);
  std::string why;
  EventFilter f;
  if (auto r = int_param(params, "run_id", 1, INT64_MAX, why)) f.run_id = *r;
  if (auto c = int_param(params, "channel", 0, 254, why)) f.channel = int(*c);
  f.after_id = int_param(params, "after", 0, INT64_MAX, why).value_or(0);
  const std::size_t n = std::size_t(int_param(params, "limit", 1, (long long)settings_.page_rows * 10, why)
                                        .value_or((long long)settings_.page_rows));
  if (!why.empty()) return bad_params(id, why);
  if (params.contains("kind")) {
    const json& k = params["kind"];
    if (k.is_string()) f.kinds.push_back(k.get<std::string>());
    else if (k.is_array() && !k.empty() && k.size() <= 32) {
      for (const auto& e : k) {
        if (!e.is_string()) return bad_params(id, "kind must be a string or a list of strings");
        f.kinds.push_back(e.get<std::string>());
      }
    } else {
      return bad_params(id, "kind must be a string or a list of 1..32 strings");
    }
  }
  // A whole number bounds the sample index; a time bounds the host time.
  for (const char* key : {"from", "to"}) {
    if (!params.contains(key)) continue;
    const json& v = params[key];
    const bool from = key[0] == 'f';
    if (v.is_number_unsigned() || (v.is_number_integer() && v.get<long long>() >= 0)) {
      (from ? f.from_index : f.to_index) = v.get<std::uint64_t>();
    } else {
      auto t = time_bound(params, key, why);
      if (!t) return bad_params(id, why);
      (from ? f.from_utc : f.to_utc) = *t;
    }
  }
  f.limit = n + 1;
  std::string store_why;
  if (!open_store(store_why)) return store_error(id, store_why);
  std::vector<EventOut> rows;
  if (storage::Status s = queries_->events(f, rows); !s.ok()) return store_error(id, s.message);
  const bool more = rows.size() > n;
  if (more) rows.pop_back();
  json list = json::array();
  for (const auto& e : rows) {
    list.push_back({{"event_id", e.event_id},
                    {"run_id", e.run_id ? json(*e.run_id) : json(nullptr)},
                    {"channel", e.channel ? json(*e.channel) : json(nullptr)},
                    {"sample_index", e.sample_index ? json(*e.sample_index) : json(nullptr)},
                    {"kind", e.kind},
                    {"detail", e.detail},
                    {"host_utc", e.host_utc}});
  }
  return result_reply(id, {{"events", list}, {"next_after", more ? json(rows.back().event_id) : json(nullptr)}});
}

std::optional<Reply> Methods::board_command(const std::string& method, const json& params, const json& id,
                                            const Later& later) {
  if (auto k = unknown_key(params, {})) return bad_params(id, *k);
  if (!control_) return error_reply(id, rpc_error::control_refused, "control is not available");
  // The reply waits for the board: Control calls back once, at once when it
  // refuses, else from the command's completion (BoardCommands: ack, retries).
  ControlDone done = [later, id](ControlResult r) { later(control_reply(id, r)); };
  if (method == "reset_now") control_->reset_now(std::move(done));
  else control_->zero_window(method == "zero_start", std::move(done));
  return std::nullopt;
}

json Methods::control(const std::string& method, const json& params, const json& id) {
  std::string why;
  ControlResult r;
  if (method == "calibration_new") {
    if (auto k = unknown_key(params, {"channel", "settings"})) return bad_params(id, *k);
    auto channel = int_param(params, "channel", 0, 254, why);
    if (!why.empty()) return bad_params(id, why);
    if (!channel) return bad_params(id, "channel is required");
    if (!params.contains("settings") || !params["settings"].is_object())
      return bad_params(id, "settings must be an object (the keys of a config channels entry)");
    if (!control_) return error_reply(id, rpc_error::control_refused, "control is not available");
    r = control_->new_calibration(int(*channel), params["settings"]);
  } else {
    if (auto k = unknown_key(params, {"channel", "run_id", "from", "to", "note"})) return bad_params(id, *k);
    auto channel = int_param(params, "channel", 0, 254, why);
    if (!why.empty()) return bad_params(id, why);
    if (!params.contains("from") || !params.contains("to")) return bad_params(id, "from and to are required");
    if (params.contains("note") && (!params["note"].is_string() || params["note"].get<std::string>().size() > 1000))
      return bad_params(id, "note must be text of at most 1000 bytes");
    storage::RunInfo run;
    json err;
    if (!resolve_run(params, id, run, err)) return err;
    const auto from = index_bound(params, "from", run, why);
    const auto to = index_bound(params, "to", run, why);
    if (!why.empty()) return bad_params(id, why);
    if (*from > *to) return bad_params(id, "from is after to");
    if (!control_) return error_reply(id, rpc_error::control_refused, "control is not available");
    r = control_->mark_quiet(channel ? std::optional<int>(int(*channel)) : std::nullopt, *from, *to,
                             params.value("note", ""));
  }
  return control_reply(id, r);
}

json Methods::subscribe(const json& params, const json& id, Peer& peer) {
  if (auto k = unknown_key(params, {"topics", "channels"})) return bad_params(id, *k);
  unsigned topics = 0;
  if (!params.contains("topics")) topics = Hub::values | Hub::events;
  else if (!params["topics"].is_array() || params["topics"].empty()) return bad_params(id, "topics must be a list of values, events");
  else {
    for (const auto& t : params["topics"]) {
      if (t == "values") topics |= Hub::values;
      else if (t == "events") topics |= Hub::events;
      else return bad_params(id, "topics must be a list of values, events");
    }
  }
  std::set<int> channels;
  if (params.contains("channels")) {
    if (!params["channels"].is_array()) return bad_params(id, "channels must be a list of channel numbers");
    for (const auto& c : params["channels"]) {
      if (!c.is_number_integer() || c.get<long long>() < 0 || c.get<long long>() > 254)
        return bad_params(id, "channels must be a list of channel numbers 0..254");
      channels.insert(c.get<int>());
    }
  }
  if (!peer.sink_ptr) return error_reply(id, rpc_error::internal_error, "this connection cannot take notifications");
  if (hub_.subscriptions_of(peer.sink_ptr) >= kMaxSubscriptionsPerClient)
    return bad_params(id, "at most " + std::to_string(kMaxSubscriptionsPerClient) + " subscriptions per connection");
  const std::int64_t sub = hub_.subscribe(peer.sink, topics, std::move(channels));
  json names = json::array();
  if (topics & Hub::values) names.push_back("values");
  if (topics & Hub::events) names.push_back("events");
  return result_reply(id, {{"subscription", sub}, {"topics", names}});
}

json Methods::unsubscribe(const json& params, const json& id, Peer& peer) {
  if (auto k = unknown_key(params, {"subscription"})) return bad_params(id, *k);
  std::string why;
  auto sub = int_param(params, "subscription", 1, INT64_MAX, why);
  if (!why.empty() || !sub) return bad_params(id, why.empty() ? "subscription is required" : why);
  if (!hub_.unsubscribe(peer.sink_ptr, *sub)) return bad_params(id, "no such subscription on this connection");
  return result_reply(id, {{"subscription", *sub}, {"active", false}});
}

// --- Derivations and reprocessing (docs/api.md, "Derivations") ---

bool Methods::resolve_derivation(const json& params, const json& id, const storage::RunInfo& run, int& derivation,
                                 json& err) {
  std::string why;
  auto wanted = int_param(params, "derivation", 1, 1000000, why);
  if (!why.empty()) {
    err = bad_params(id, why);
    return false;
  }
  if (storage::Status s = reader_->resolve_derivation(run.run_id, wanted ? std::optional<int>(int(*wanted)) : std::nullopt,
                                                      derivation);
      !s.ok()) {
    err = s.code == SQLITE_NOTFOUND ? bad_params(id, s.message) : store_error(id, s.message);
    return false;
  }
  return true;
}

json Methods::run_totals(const json& params, const json& id) {
  storage::RunInfo run;
  json err;
  int derivation = 1;
  if (!resolve_run(params, id, run, err) || !resolve_derivation(params, id, run, derivation, err)) return err;
  std::vector<storage::DerivationInfo> ds;
  if (storage::Status s = reader_->derivations(run.run_id, ds); !s.ok()) return store_error(id, s.message);
  json out = json::array();
  for (const auto& d : ds) {
    if (d.derivation != derivation) continue;
    for (const auto& c : d.channels) {
      const double total = c.total.value_or(0.0), u = c.std_uncertainty.value_or(0.0);
      out.push_back({{"channel", c.channel},
                     {"run_id", run.run_id},
                     {"derivation", derivation},
                     {"quantity", c.quantity},
                     {"unit", c.unit},
                     {"total", c.total ? json(total) : json(nullptr)},
                     {"std_uncertainty", c.std_uncertainty ? json(u) : json(nullptr)},
                     {"expanded_uncertainty_k2", c.std_uncertainty ? json(2.0 * u) : json(nullptr)},
                     {"quantity_per_volt", c.quantity_per_volt},
                     {"segments", c.segments},
                     {"flags", c.flags},
                     {"last_index", c.last_index ? json(*c.last_index) : json(nullptr)},
                     {"calibration_id", c.calibration_id},
                     {"baseline", c.baseline}});
    }
  }
  return result_reply(id, {{"channels", out}});
}

json Methods::derivations(const json& params, const json& id) {
  if (auto k = unknown_key(params, {"run_id"})) return bad_params(id, *k);
  storage::RunInfo run;
  json err;
  if (!resolve_run(params, id, run, err)) return err;
  std::vector<storage::DerivationInfo> ds;
  if (storage::Status s = reader_->derivations(run.run_id, ds); !s.ok()) return store_error(id, s.message);
  int newest = 0;
  (void)reader_->resolve_derivation(run.run_id, std::nullopt, newest);
  json list = json::array();
  for (const auto& d : ds) {
    json changes = json::parse(d.changes, nullptr, false);
    if (changes.is_discarded()) changes = d.changes;
    json channels = json::array();
    for (const auto& c : d.channels)
      channels.push_back({{"channel", c.channel},
                          {"calibration_id", c.calibration_id},
                          {"baseline", c.baseline},
                          {"unit", c.unit},
                          {"total", c.total ? json(*c.total) : json(nullptr)},
                          {"std_uncertainty", c.std_uncertainty ? json(*c.std_uncertainty) : json(nullptr)},
                          {"segments", c.segments}});
    list.push_back({{"derivation", d.derivation},
                    {"parent", d.parent ? json(*d.parent) : json(nullptr)},
                    {"created_utc", d.created_utc},
                    {"finished_utc", d.finished_utc.empty() ? json(nullptr) : json(d.finished_utc)},
                    {"who", d.who},
                    {"reason", d.reason},
                    {"state", d.state},
                    {"changes", changes},
                    {"channels", channels}});
  }
  return result_reply(id, {{"run_id", run.run_id}, {"newest", newest ? json(newest) : json(nullptr)}, {"derivations", list}});
}

namespace {

// One entry of "changes"; false with `why` on a bad value.
bool parse_change(const json& j, storage::ChannelChange& c, std::string& why) {
  if (!j.is_object()) return why = "each change must be an object", false;
  static const std::set<std::string> known = {"channel",        "c_farad",         "r1_ohm",        "r2_ohm",
                                              "gain",           "zero_code",       "baseline_model", "baseline_robust",
                                              "quiet_windows",  "drop_baselines"};
  for (auto it = j.begin(); it != j.end(); ++it)
    if (!known.count(it.key())) return why = "unknown change " + it.key(), false;
  if (j.contains("channel")) {
    if (!j["channel"].is_number_integer() || j["channel"].get<long long>() < 0 || j["channel"].get<long long>() > 254)
      return why = "channel must be a whole number 0..254", false;
    c.channel = j["channel"].get<int>();
  }
  for (const auto& [key, field] : {std::pair<const char*, std::optional<double>*>{"c_farad", &c.c_farad},
                                   {"r1_ohm", &c.r1_ohm}, {"r2_ohm", &c.r2_ohm}, {"gain", &c.gain}}) {
    if (!j.contains(key)) continue;
    if (!j[key].is_number()) return why = std::string(key) + " must be a number", false;
    *field = j[key].get<double>();
  }
  if (j.contains("zero_code")) {
    if (!j["zero_code"].is_number_integer()) return why = "zero_code must be a whole number", false;
    c.zero_code = j["zero_code"].get<std::int32_t>();
  }
  if (j.contains("baseline_model")) {
    chain::BaselineModel m;
    if (!j["baseline_model"].is_string() || !storage::parse_baseline_model(j["baseline_model"].get<std::string>(), m))
      return why = "baseline_model must be linear or quadratic", false;
    c.baseline_model = m;
  }
  if (j.contains("baseline_robust")) {
    chain::BaselineRobust r;
    if (!j["baseline_robust"].is_string() || !storage::parse_baseline_robust(j["baseline_robust"].get<std::string>(), r))
      return why = "baseline_robust must be none or huber", false;
    c.baseline_robust = r;
  }
  if (j.contains("quiet_windows")) {
    if (!j["quiet_windows"].is_array()) return why = "quiet_windows must be a list of [first_index, last_index]", false;
    for (const auto& q : j["quiet_windows"]) {
      if (!q.is_array() || q.size() != 2 || !q[0].is_number_unsigned() || !q[1].is_number_unsigned())
        return why = "quiet_windows must be a list of [first_index, last_index]", false;
      c.add_quiet_windows.push_back({q[0].get<std::uint64_t>(), q[1].get<std::uint64_t>()});
    }
  }
  if (j.contains("drop_baselines")) {
    if (!j["drop_baselines"].is_array()) return why = "drop_baselines must be a list of baseline ordinals", false;
    for (const auto& d : j["drop_baselines"]) {
      if (!d.is_number_unsigned() || d.get<std::uint64_t>() < 1 || d.get<std::uint64_t>() > UINT32_MAX)
        return why = "drop_baselines must be a list of baseline ordinals", false;
      c.drop_baselines.push_back(d.get<std::uint32_t>());
    }
  }
  return true;
}

}  // namespace

json Methods::reprocess(const json& params, const json& id, Peer& peer) {
  if (auto k = unknown_key(params, {"run_id", "parent", "who", "reason", "changes", "progress"})) return bad_params(id, *k);
  std::string why;
  auto run_id = int_param(params, "run_id", 1, INT64_MAX, why);
  auto parent = int_param(params, "parent", 1, 1000000, why);
  if (!why.empty()) return bad_params(id, why);
  if (!run_id) return bad_params(id, "run_id is required");
  for (const char* key : {"who", "reason"})
    if (params.contains(key) && (!params[key].is_string() || params[key].get<std::string>().size() > 1000))
      return bad_params(id, std::string(key) + " must be text of at most 1000 bytes");
  if (params.contains("progress") && !params["progress"].is_boolean()) return bad_params(id, "progress must be true or false");
  storage::ReprocessRequest req;
  req.run_id = *run_id;
  if (parent) req.parent = int(*parent);
  req.who = params.value("who", "api client");
  req.reason = params.value("reason", "");
  if (params.contains("changes")) {
    if (!params["changes"].is_array() || params["changes"].size() > 255) return bad_params(id, "changes must be a list");
    for (const auto& c : params["changes"]) {
      storage::ChannelChange change;
      if (!parse_change(c, change, why)) return bad_params(id, why);
      req.changes.push_back(std::move(change));
    }
  }
  if (!reprocessor_) return error_reply(id, rpc_error::control_refused, "reprocessing is not available");
  if (!peer.sink_ptr) return error_reply(id, rpc_error::internal_error, "this connection cannot take notifications");
  ControlResult r = reprocessor_->start(std::move(req), peer.sink, params.value("progress", true));
  if (!r.ok) return error_reply(id, rpc_error::control_refused, "reprocess refused: " + r.message);
  return result_reply(id, r.detail);
}

}  // namespace accrue::daemon::api
