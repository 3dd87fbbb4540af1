// The subcommands that read the store's tables: channels, calibration,
// segments, events (docs/api.md, the methods of the same names).
#include <cstdio>
#include <string>

#include "tools/accrue/cli_args.hpp"
#include "tools/accrue/commands.hpp"
#include "tools/accrue/rpc_client.hpp"

namespace accrue::client {

using nlohmann::json;

namespace {

std::string flags_text(long long flags) {
  static const char* names[] = {"clipped", "gap-estimated", "no-baseline", "provisional"};
  std::string out;
  for (int b = 0; b < 4; ++b)
    if (flags & (1LL << b)) out += (out.empty() ? "" : ",") + std::string(names[b]);
  return out.empty() ? "-" : out;
}

std::string text_or_dash(const json& j, const char* key) {
  if (!j.contains(key) || j[key].is_null()) return "-";
  if (j[key].is_string()) return j[key].get<std::string>();
  return j[key].dump();
}

// "C 1 nF, R1 1 Gohm, R2 none" from a calibration's definition.
std::string front_end_text(const json& def) {
  if (!def.is_object() || !def.contains("front_end")) return "-";
  const json& f = def["front_end"];
  const double r2 = f.value("r2_ohm", 0.0);
  return "C " + format_si(f.value("c_farad", 0.0), "F", 4) + ", R1 " + format_si(f.value("r1_ohm", 0.0), "ohm", 4) +
         ", R2 " + (r2 > 0 ? format_si(r2, "ohm", 4) : std::string("none"));
}

std::string number_text(double v) {
  char buf[32];
  std::snprintf(buf, sizeof buf, "%g", v);
  return buf;
}

std::string adc_text(const json& def) {
  if (!def.is_object() || !def.contains("adc")) return "-";
  const json& a = def["adc"];
  return std::to_string(a.value("bits", 0)) + "-bit " + (a.value("bipolar", true) ? "±" : "0..") +
         format_si(a.value("full_scale_v", 0.0), "V", 4) + ", gain " + number_text(a.value("gain", 1.0));
}

bool no_options(const char* name, const std::vector<std::string>& args) {
  if (args.empty()) return true;
  std::fprintf(stderr, "accrue %s: unknown option %s\n", name, args[0].c_str());
  return false;
}

}  // namespace

int cmd_channels(const CommonOptions& o, const std::vector<std::string>& args) {
  if (!no_options("channels", args)) return 2;
  RpcClient c(o.socket_path);
  auto r = c.call("channels");
  if (!r.ok) return fail(r);
  if (o.json) return print_json(r.result), 0;
  std::printf("%-4s %-14s %-6s %-16s %-34s %-28s %s\n", "ch", "quantity", "unit", "calibration", "front end", "ADC",
              "live total");
  for (const auto& ch : r.result["channels"]) {
    const json& cal = ch["calibration"];
    const json def = cal.is_object() ? cal.value("definition", json()) : json();
    const std::string unit = cal.is_object() ? cal.value("unit", "") : "";
    std::string live = "-";
    if (ch.contains("live") && ch["live"].is_object())
      live = format_si(ch["live"].value("total", 0.0), ch["live"].value("unit", unit), 6);
    const std::string version = cal.is_object() ? "id " + std::to_string(cal.value("calibration_id", 0)) + ", " +
                                                      std::to_string(ch.value("calibration_versions", 0)) + " kept"
                                                : "-";
    std::printf("%-4d %-14s %-6s %-16s %-34s %-28s %s\n", ch.value("channel", 0),
                cal.is_object() ? cal.value("quantity", "").c_str() : "-", unit.empty() ? "-" : unit.c_str(),
                version.c_str(), front_end_text(def).c_str(), adc_text(def).c_str(), live.c_str());
  }
  return 0;
}

int cmd_calibration(const CommonOptions& o, const std::vector<std::string>& args) {
  json params = json::object();
  for (std::size_t i = 0; i < args.size(); ++i) {
    std::string v;
    if (parse_flag(args, i, "--channel", v)) params["channel"] = whole_number("--channel", v);
    else {
      std::fprintf(stderr, "accrue calibration: unknown option %s\n", args[i].c_str());
      return 2;
    }
  }
  RpcClient c(o.socket_path);
  auto r = c.call("calibration", params);
  if (!r.ok) return fail(r);
  if (o.json) return print_json(r.result), 0;
  std::printf("%-4s %-4s %-26s %-13s %-6s %-14s %-10s %-34s %s\n", "id", "ch", "created", "quantity", "unit",
              "per volt", "sensor", "front end", "ADC");
  for (const auto& v : r.result["versions"]) {
    const json def = v.value("definition", json());
    std::printf("%-4lld %-4d %-26s %-13s %-6s %-14.6g %-10s %-34s %s\n", (long long)v.value("calibration_id", 0),
                v.value("channel", 0), v.value("created_utc", "").c_str(), v.value("quantity", "").c_str(),
                v.value("unit", "").c_str(), v.value("quantity_per_volt", 0.0),
                def.is_object() ? def.value("sensor", "-").c_str() : "-", front_end_text(def).c_str(),
                adc_text(def).c_str());
  }
  return 0;
}

int cmd_segments(const CommonOptions& o, const std::vector<std::string>& args) {
  json params = json::object();
  for (std::size_t i = 0; i < args.size(); ++i) {
    std::string v;
    if (parse_flag(args, i, "--channel", v)) params["channel"] = whole_number("--channel", v);
    else if (parse_flag(args, i, "--run", v)) params["run_id"] = whole_number("--run", v);
    else if (parse_flag(args, i, "--derivation", v)) params["derivation"] = whole_number("--derivation", v);
    else if (parse_flag(args, i, "--from", v)) params["from"] = bound_value(v);
    else if (parse_flag(args, i, "--to", v)) params["to"] = bound_value(v);
    else if (parse_flag(args, i, "--after", v)) params["after"] = whole_number("--after", v);
    else if (parse_flag(args, i, "--limit", v)) params["limit"] = whole_number("--limit", v);
    else {
      std::fprintf(stderr, "accrue segments: unknown option %s\n", args[i].c_str());
      return 2;
    }
  }
  RpcClient c(o.socket_path);
  auto r = c.call("segments", params);
  if (!r.ok) return fail(r);
  if (o.json) return print_json(r.result), 0;
  std::printf("run %lld channel %d\n", (long long)r.result.value("run_id", 0), r.result.value("channel", 0));
  std::printf("%-7s %-26s %-12s %-11s %-11s %-11s %-16s %-16s %s\n", "segment", "start", "length", "start V", "end V",
              "drift V", "quantity", "total after", "flags");
  for (const auto& s : r.result["segments"]) {
    std::printf("%-7lld %-26s %-12s %-11.6f %-11.6f %-11.6f %-16.9g %-16.9g %s\n", (long long)s.value("ordinal", 0),
                s.value("start_utc", "").c_str(), format_si(s.value("length_s", 0.0), "s", 6).c_str(),
                s.value("start_v", 0.0), s.value("end_v", 0.0), s.value("drift_v", 0.0), s.value("quantity", 0.0),
                s.value("total_after", 0.0), flags_text(s.value("flags", 0LL)).c_str());
  }
  if (!r.result["next_after"].is_null())
    std::printf("(more: add --after %s)\n", r.result["next_after"].dump().c_str());
  return 0;
}

int cmd_events(const CommonOptions& o, const std::vector<std::string>& args) {
  json params = json::object();
  json kinds = json::array();
  for (std::size_t i = 0; i < args.size(); ++i) {
    std::string v;
    if (parse_flag(args, i, "--channel", v)) params["channel"] = whole_number("--channel", v);
    else if (parse_flag(args, i, "--run", v)) params["run_id"] = whole_number("--run", v);
    else if (parse_flag(args, i, "--from", v)) params["from"] = bound_value(v);
    else if (parse_flag(args, i, "--to", v)) params["to"] = bound_value(v);
    else if (parse_flag(args, i, "--after", v)) params["after"] = whole_number("--after", v);
    else if (parse_flag(args, i, "--limit", v)) params["limit"] = whole_number("--limit", v);
    else if (parse_flag(args, i, "--kind", v)) kinds.push_back(v);
    else {
      std::fprintf(stderr, "accrue events: unknown option %s\n", args[i].c_str());
      return 2;
    }
  }
  if (!kinds.empty()) params["kind"] = kinds;
  RpcClient c(o.socket_path);
  auto r = c.call("events", params);
  if (!r.ok) return fail(r);
  if (o.json) return print_json(r.result), 0;
  std::printf("%-8s %-26s %-26s %-4s %-12s %s\n", "event", "host time", "kind", "ch", "index", "detail");
  for (const auto& e : r.result["events"]) {
    std::printf("%-8lld %-26s %-26s %-4s %-12s %s\n", (long long)e.value("event_id", 0), e.value("host_utc", "").c_str(),
                e.value("kind", "").c_str(), text_or_dash(e, "channel").c_str(), text_or_dash(e, "sample_index").c_str(),
                e.value("detail", "").c_str());
  }
  if (!r.result["next_after"].is_null())
    std::printf("(more: add --after %s)\n", r.result["next_after"].dump().c_str());
  return 0;
}

}  // namespace accrue::client
