#include "daemon/options.hpp"

#include <fstream>
#include <nlohmann/json.hpp>
#include <set>
#include <sstream>

namespace accrue::daemon {
namespace {

using nlohmann::json;

struct Checker {
  std::vector<ConfigError>& errors;
  void fail(const std::string& key, const std::string& reason) { errors.push_back({key, reason}); }

  bool number(const json& j, const std::string& key, double& out, double min, double max, bool min_open = false) {
    if (!j.is_number()) {
      fail(key, "must be a number, got " + std::string(j.type_name()));
      return false;
    }
    const double v = j.get<double>();
    if (v < min || v > max || (min_open && v == min)) {
      std::ostringstream s;
      s << "must be " << (min_open ? "> " : ">= ") << min << " and <= " << max << ", got " << v;
      fail(key, s.str());
      return false;
    }
    out = v;
    return true;
  }
  bool integer(const json& j, const std::string& key, int& out, int min, int max) {
    if (!j.is_number_integer()) {
      fail(key, "must be a whole number, got " + j.dump());
      return false;
    }
    const auto v = j.get<long long>();
    if (v < min || v > max) {
      fail(key, "must be between " + std::to_string(min) + " and " + std::to_string(max) + ", got " + std::to_string(v));
      return false;
    }
    out = int(v);
    return true;
  }
  bool text(const json& j, const std::string& key, std::string& out) {
    if (!j.is_string()) {
      fail(key, "must be a string, got " + std::string(j.type_name()));
      return false;
    }
    out = j.get<std::string>();
    return true;
  }
};

void load_channel(const json& j, const std::string& at, DaemonConfig& config, Checker& c) {
  if (!j.is_object()) return c.fail(at, "must be an object");
  static const std::set<std::string> known = {"channel", "sensor", "c_farad", "r1_ohm", "r2_ohm",
                                              "gain", "zero_code", "inverting"};
  for (auto it = j.begin(); it != j.end(); ++it)
    if (!known.count(it.key())) c.fail(at + "." + it.key(), "unknown key");
  int index = 0;
  if (!j.contains("channel")) return c.fail(at + ".channel", "is required");
  if (!c.integer(j["channel"], at + ".channel", index, 0, 254)) return;
  if (config.channels.count(index)) return c.fail(at + ".channel", "channel " + std::to_string(index) + " is listed twice");
  ChannelConfig ch;
  double v = 0;
  if (j.contains("sensor")) {
    std::string s;
    if (c.text(j["sensor"], at + ".sensor", s) && !chain::parse_sensor_kind(s, ch.sensor))
      c.fail(at + ".sensor", "must be charge or volt_seconds, got \"" + s + "\"");
  }
  if (j.contains("c_farad") && c.number(j["c_farad"], at + ".c_farad", v, 0, 1.0, true)) ch.c_farad = v;
  if (j.contains("r1_ohm") && c.number(j["r1_ohm"], at + ".r1_ohm", v, 0, 1e15, true)) ch.r1_ohm = v;
  if (j.contains("r2_ohm") && c.number(j["r2_ohm"], at + ".r2_ohm", v, 0, 1e15)) ch.r2_ohm = v;
  if (j.contains("gain") && c.number(j["gain"], at + ".gain", v, 0, 1e6, true)) ch.gain = v;
  int z = 0;
  if (j.contains("zero_code") && c.integer(j["zero_code"], at + ".zero_code", z, -(1 << 23), (1 << 24) - 1)) ch.zero_code = z;
  if (j.contains("inverting")) {
    if (j["inverting"].is_boolean()) ch.inverting = j["inverting"].get<bool>();
    else c.fail(at + ".inverting", "must be true or false");
  }
  if (ch.sensor == chain::SensorKind::volt_seconds && !ch.r1_ohm)
    c.fail(at + ".r1_ohm", "is required for sensor volt_seconds (quantity = -R1*C*dV)");
  config.channels[index] = ch;
}

}  // namespace

std::vector<ConfigError> load_config_text(const std::string& text, DaemonConfig& config) {
  std::vector<ConfigError> errors;
  Checker c{errors};
  json j;
  try {
    j = json::parse(text, nullptr, true, /*ignore_comments=*/true);
  } catch (const json::parse_error& e) {
    c.fail("(file)", std::string("is not valid JSON: ") + e.what());
    return errors;
  }
  if (!j.is_object()) {
    c.fail("(file)", "must be a JSON object");
    return errors;
  }
  static const std::set<std::string> known = {"device", "baud", "database", "socket", "settle_s", "end_window",
                                              "series_interval_s", "commit_interval_ms", "reconnect_max_s",
                                              "log_level", "channels"};
  for (auto it = j.begin(); it != j.end(); ++it)
    if (!known.count(it.key())) c.fail(it.key(), "unknown key");
  if (j.contains("device")) c.text(j["device"], "device", config.device);
  if (j.contains("baud")) c.integer(j["baud"], "baud", config.baud, 50, 12'000'000);
  if (j.contains("database")) c.text(j["database"], "database", config.database);
  if (j.contains("socket")) c.text(j["socket"], "socket", config.socket_path);
  if (j.contains("settle_s")) c.number(j["settle_s"], "settle_s", config.settle_s, 0, 10);
  if (j.contains("end_window")) c.integer(j["end_window"], "end_window", config.end_window, 2, 65536);
  if (j.contains("series_interval_s"))
    c.number(j["series_interval_s"], "series_interval_s", config.series_interval_s, 0, 3600, true);
  if (j.contains("commit_interval_ms"))
    c.integer(j["commit_interval_ms"], "commit_interval_ms", config.commit_interval_ms, 10, 60'000);
  if (j.contains("reconnect_max_s")) c.number(j["reconnect_max_s"], "reconnect_max_s", config.reconnect_max_s, 0.1, 3600);
  if (j.contains("log_level")) {
    std::string s;
    if (c.text(j["log_level"], "log_level", s) && !parse_log_level(s, config.log_level))
      c.fail("log_level", "must be error, warning, notice, info or debug, got \"" + s + "\"");
  }
  if (j.contains("channels")) {
    if (!j["channels"].is_array()) {
      c.fail("channels", "must be an array of channel objects");
    } else {
      for (std::size_t i = 0; i < j["channels"].size(); ++i)
        load_channel(j["channels"][i], "channels[" + std::to_string(i) + "]", config, c);
    }
  }
  return errors;
}

std::vector<ConfigError> load_config(const std::string& path, DaemonConfig& config) {
  std::ifstream in(path);
  if (!in) return {{"(file)", "cannot read " + path}};
  std::stringstream ss;
  ss << in.rdbuf();
  return load_config_text(ss.str(), config);
}

std::vector<ConfigError> validate(const DaemonConfig& config) {
  std::vector<ConfigError> errors;
  if (config.device.empty() && config.replay_path.empty()) errors.push_back({"device", "is required (a path, usb-serial:SERIAL or usb-id:VVVV:PPPP)"});
  if (config.database.empty()) errors.push_back({"database", "must not be empty"});
  if (config.socket_path.empty()) errors.push_back({"socket", "must not be empty"});
  if (config.socket_path.size() >= 108) errors.push_back({"socket", "path is longer than a Unix socket allows (107)"});
  return errors;
}

}  // namespace accrue::daemon
