// The control subcommands: reset, zero start|stop, quiet, calibrate
// (docs/api.md, reset_now, zero_start, zero_stop, quiet_mark, calibration_new). They change what the board
// does or what the baseline may use, so each prints what was asked. The daemon answers reset and zero only
// once the board has acknowledged the command (or refused it, or never answered: then an error, exit 1).
#include <cstdio>
#include <string>

#include "tools/accrue/cli_args.hpp"
#include "tools/accrue/commands.hpp"
#include "tools/accrue/rpc_client.hpp"

namespace accrue::client {

using nlohmann::json;

namespace {

int send_command(const CommonOptions& o, const char* method, const char* what) {
  RpcClient c(o.socket_path);
  auto r = c.call(method);
  if (!r.ok) return fail(r);
  if (o.json) {
    print_json(r.result);
    return 0;
  }
  std::printf("%s: acknowledged by the board (request %lld)\n", what, (long long)r.result.value("request_id", 0));
  return 0;
}

}  // namespace

int cmd_reset(const CommonOptions& o, const std::vector<std::string>& args) {
  if (!args.empty()) {
    std::fprintf(stderr, "accrue reset: takes no options\n");
    return 2;
  }
  return send_command(o, "reset_now", "reset now");
}

int cmd_zero(const CommonOptions& o, const std::vector<std::string>& args) {
  if (args.size() != 1 || (args[0] != "start" && args[0] != "stop")) {
    std::fprintf(stderr, "accrue zero: say start (close the zero relay) or stop (open it)\n");
    return 2;
  }
  return args[0] == "start" ? send_command(o, "zero_start", "zero window start")
                            : send_command(o, "zero_stop", "zero window stop");
}

int cmd_quiet(const CommonOptions& o, const std::vector<std::string>& args) {
  json params = json::object();
  for (std::size_t i = 0; i < args.size(); ++i) {
    std::string v;
    if (parse_flag(args, i, "--channel", v)) params["channel"] = whole_number("--channel", v);
    else if (parse_flag(args, i, "--run", v)) params["run_id"] = whole_number("--run", v);
    else if (parse_flag(args, i, "--from", v)) params["from"] = bound_value(v);
    else if (parse_flag(args, i, "--to", v)) params["to"] = bound_value(v);
    else if (parse_flag(args, i, "--note", v)) params["note"] = v;
    else {
      std::fprintf(stderr, "accrue quiet: unknown option %s\n", args[i].c_str());
      return 2;
    }
  }
  if (!params.contains("from") || !params.contains("to")) {
    std::fprintf(stderr, "accrue quiet: --from and --to are required\n");
    return 2;
  }
  RpcClient c(o.socket_path);
  auto r = c.call("quiet_mark", params);
  if (!r.ok) return fail(r);
  if (o.json) {
    print_json(r.result);
    return 0;
  }
  std::printf("quiet window recorded: sample index %s to %s\n", r.result["from_index"].dump().c_str(),
              r.result["to_index"].dump().c_str());
  const json& from = r.result.contains("baseline_from_index") ? r.result["baseline_from_index"] : json(nullptr);
  if (from.is_null())
    std::printf("the live baseline cannot use it: the interval is already processed (the event keeps it)\n");
  else
    std::printf("the live baseline fits it from sample index %s\n", from.dump().c_str());
  return 0;
}

int cmd_calibrate(const CommonOptions& o, const std::vector<std::string>& args) {
  json params = json::object();
  std::string settings;
  for (std::size_t i = 0; i < args.size(); ++i) {
    std::string v;
    if (parse_flag(args, i, "--channel", v)) params["channel"] = whole_number("--channel", v);
    else if (settings.empty() && !args[i].starts_with("--")) settings = args[i];
    else {
      std::fprintf(stderr, "accrue calibrate: unknown option %s\n", args[i].c_str());
      return 2;
    }
  }
  const json parsed = json::parse(settings, nullptr, false);
  if (!params.contains("channel") || parsed.is_discarded() || !parsed.is_object()) {
    std::fprintf(stderr, "accrue calibrate: give --channel N and the settings as a JSON object, e.g.\n"
                         "  accrue calibrate --channel 0 '{\"c_farad\": 1e-9, \"r1_ohm\": 1e9}'\n");
    return 2;
  }
  params["settings"] = parsed;
  RpcClient c(o.socket_path);
  auto r = c.call("calibration_new", params);
  if (!r.ok) return fail(r);
  if (o.json) {
    print_json(r.result);
    return 0;
  }
  if (!r.result.value("changed", false))
    std::printf("channel %d: the settings are those in use; nothing changed\n", r.result.value("channel", 0));
  else
    std::printf("channel %d: new calibration settings taken%s; see accrue calibration for the new version\n",
                r.result.value("channel", 0),
                r.result.value("run_closed", false) ? " (the run closed; the next data opens a new one)" : "");
  return 0;
}

}  // namespace accrue::client
