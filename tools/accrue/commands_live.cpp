// accrue tail: live values and events as they come (docs/api.md, subscribe).
// It subscribes on one connection and prints each notification: a line per
// channel for "values", a line per "event"; with --json, each notification as
// one JSON line. It ends after --count notifications or --seconds of wall
// time, or when the daemon cuts it off or goes away (exit 1).
#include <chrono>
#include <cstdio>
#include <string>

#include "tools/accrue/cli_args.hpp"
#include "tools/accrue/commands.hpp"
#include "tools/accrue/rpc_client.hpp"

namespace accrue::client {

using nlohmann::json;

int cmd_tail(const CommonOptions& o, const std::vector<std::string>& args) {
  json params = json::object();
  json channels = json::array();
  long long count = -1;
  double seconds = -1;
  for (std::size_t i = 0; i < args.size(); ++i) {
    std::string v;
    if (parse_flag(args, i, "--channel", v)) {
      channels.push_back(whole_number("--channel", v));
    } else if (parse_flag(args, i, "--topics", v)) {
      json topics = json::array();
      for (std::size_t at = 0; at <= v.size();) {
        const auto comma = v.find(',', at);
        topics.push_back(v.substr(at, comma == std::string::npos ? std::string::npos : comma - at));
        if (comma == std::string::npos) break;
        at = comma + 1;
      }
      params["topics"] = topics;
    } else if (parse_flag(args, i, "--count", v)) {
      count = whole_number("--count", v);
    } else if (parse_flag(args, i, "--seconds", v)) {
      char* end = nullptr;
      seconds = std::strtod(v.c_str(), &end);
      if (v.empty() || *end != '\0' || !(seconds > 0)) {
        std::fprintf(stderr, "accrue tail: --seconds takes a positive number\n");
        return 2;
      }
    } else {
      std::fprintf(stderr, "accrue tail: unknown option %s\n", args[i].c_str());
      return 2;
    }
  }
  if (!channels.empty()) params["channels"] = channels;
  RpcClient c(o.socket_path);
  auto r = c.call("subscribe", params);
  if (!r.ok) return fail(r);
  if (!o.json)
    std::printf("subscription %lld: %s (stop with Ctrl-C)\n", (long long)r.result.value("subscription", 0),
                r.result["topics"].dump().c_str());
  std::fflush(stdout);
  const auto start = std::chrono::steady_clock::now();
  for (long long seen = 0; count < 0 || seen < count; ++seen) {
    double wait_s = 3600.0;
    if (seconds > 0) {
      wait_s = seconds - std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
      if (wait_s <= 0) return 0;
    }
    json note;
    std::string why;
    if (!c.next_notification(note, wait_s, why)) {
      if (why == "timeout" && seconds > 0) return 0;
      std::fprintf(stderr, "accrue tail: %s\n", why.c_str());
      return 1;
    }
    const std::string method = note.value("method", "");
    const json& p = note.contains("params") ? note["params"] : json::object();
    if (o.json) {
      std::printf("%s\n", note.dump(-1, ' ', false, json::error_handler_t::replace).c_str());
    } else if (method == "values") {
      for (const auto& ch : p["channels"]) {
        const std::string unit = ch.value("unit", "");
        std::printf("%s  ch %-3d %s %-16s u %-12s index %-12llu segments %u\n", p.value("host_utc", "").c_str(),
                    ch.value("channel", 0), ch.value("quantity", "").c_str(),
                    format_si(ch.value("total", 0.0), unit, 8).c_str(),
                    format_si(ch.value("std_uncertainty", 0.0), unit, 3).c_str(),
                    (unsigned long long)ch.value("last_index", 0ull), ch.value("segments", 0u));
      }
    } else if (method == "event") {
      const std::string ch = p.contains("channel") && p["channel"].is_number() ? p["channel"].dump() : "-";
      const std::string index = p.contains("sample_index") && p["sample_index"].is_number() ? p["sample_index"].dump() : "-";
      std::printf("%s  event %-24s ch %-3s index %-12s %s\n", p.value("host_utc", "").c_str(), p.value("kind", "").c_str(),
                  ch.c_str(), index.c_str(), p.value("detail", "").c_str());
    } else {
      std::printf("%s %s\n", method.c_str(), p.dump().c_str());
    }
    std::fflush(stdout);
    if (method == "cut_off") {
      std::fprintf(stderr, "accrue tail: the daemon cut this client off: %s\n", p.value("message", "").c_str());
      return 1;
    }
  }
  return 0;
}

}  // namespace accrue::client
