#include "daemon/options.hpp"

#include <grp.h>
#include <sys/stat.h>
#include <unistd.h>

#include <cerrno>
#include <cstring>
#include <fstream>
#include <nlohmann/json.hpp>
#include <set>
#include <sstream>

#include "daemon/asio.hpp"
#include "storage/utc.hpp"
#include "daemon/chain/si_value.hpp"

namespace accrue::daemon {
namespace {

using nlohmann::json;

// Collects errors; each check names the key, echoes the value and says why.
struct Checker {
  std::vector<ConfigError>& errors;
  void fail(const std::string& key, const std::string& reason) { errors.push_back({key, reason, ""}); }
  void fail(const std::string& key, const json& value, const std::string& reason) {
    errors.push_back({key, reason, value.dump()});
  }

  bool number(const json& j, const std::string& key, double& out, double min, double max, bool min_open = false) {
    if (!j.is_number()) {
      fail(key, j, "must be a number, got " + std::string(j.type_name()));
      return false;
    }
    const double v = j.get<double>();
    if (v < min || v > max || (min_open && v == min)) {
      std::ostringstream s;
      s << "must be " << (min_open ? "> " : ">= ") << min << " and <= " << max;
      fail(key, j, s.str());
      return false;
    }
    out = v;
    return true;
  }
  bool integer(const json& j, const std::string& key, int& out, int min, int max) {
    if (!j.is_number_integer()) {
      fail(key, j, "must be a whole number");
      return false;
    }
    const auto v = j.get<long long>();
    if (v < min || v > max) {
      fail(key, j, "must be between " + std::to_string(min) + " and " + std::to_string(max));
      return false;
    }
    out = int(v);
    return true;
  }
  bool text(const json& j, const std::string& key, std::string& out) {
    if (!j.is_string()) {
      fail(key, j, "must be a string, got " + std::string(j.type_name()));
      return false;
    }
    out = j.get<std::string>();
    return true;
  }
  bool boolean(const json& j, const std::string& key, bool& out) {
    if (!j.is_boolean()) {
      fail(key, j, "must be true or false");
      return false;
    }
    out = j.get<bool>();
    return true;
  }
  // A string that must be one of `allowed`; returns its position or -1.
  int choice(const json& j, const std::string& key, const std::vector<std::string>& allowed) {
    std::string s;
    if (!text(j, key, s)) return -1;
    for (std::size_t i = 0; i < allowed.size(); ++i)
      if (s == allowed[i]) return int(i);
    std::string list;
    for (std::size_t i = 0; i < allowed.size(); ++i) list += (i ? (i + 1 == allowed.size() ? " or " : ", ") : "") + allowed[i];
    fail(key, j, "must be " + list);
    return -1;
  }
  // An object whose keys must all be in `known`.
  bool object(const json& j, const std::string& key, const std::set<std::string>& known) {
    if (!j.is_object()) {
      fail(key, j, "must be an object");
      return false;
    }
    for (auto it = j.begin(); it != j.end(); ++it)
      if (!known.count(it.key())) fail(key + "." + it.key(), it.value(), "unknown key");
    return true;
  }
};

// A physical value: a number in the SI unit, or text with a unit ("4.7 nF").
bool si_number(Checker& c, const json& j, const std::string& key, const std::vector<std::string_view>& units,
               double& out, double min, double max, bool min_open) {
  if (j.is_string()) {
    const chain::SiParse p = chain::parse_si_value(j.get<std::string>(), units);
    if (!p.ok) {
      c.fail(key, j, p.error);
      return false;
    }
    return c.number(json(p.value), key, out, min, max, min_open);
  }
  if (!j.is_number()) {
    c.fail(key, j, "must be a number in " + std::string(units.front()) + " or text with a unit, got " +
                    std::string(j.type_name()));
    return false;
  }
  return c.number(j, key, out, min, max, min_open);
}

bool needs_r1(chain::SensorKind k) {
  using chain::SensorKind;
  return k != SensorKind::charge && k != SensorKind::piezo_force && k != SensorKind::piezo_acceleration;
}

void load_channel(const json& j, const std::string& at, DaemonConfig& config, Checker& c) {
  if (!j.is_object()) return c.fail(at, j, "must be an object");
  static const std::set<std::string> known = {
      "channel", "sensor", "c_farad", "r1_ohm", "r2_ohm", "gain", "zero_code", "inverting", "turns", "area_m2",
      "mutual_inductance_h", "sensitivity_v_per_m_per_s", "charge_sensitivity_c_per_n",
      "charge_sensitivity_c_s2_per_m", "leak_correction", "baseline", "robust"};
  for (auto it = j.begin(); it != j.end(); ++it)
    if (!known.count(it.key())) c.fail(at + "." + it.key(), it.value(), "unknown key");
  int index = 0;
  if (!j.contains("channel")) return c.fail(at + ".channel", "is required");
  if (!c.integer(j["channel"], at + ".channel", index, 0, 254)) return;
  if (config.channels.count(index)) return c.fail(at + ".channel", j["channel"], "channel " + std::to_string(index) + " is listed twice");
  ChannelConfig ch;
  double v = 0;
  if (j.contains("sensor")) {
    std::string s;
    if (c.text(j["sensor"], at + ".sensor", s) && !chain::parse_sensor_kind(s, ch.sensor))
      c.fail(at + ".sensor", j["sensor"], "must be " + std::string(chain::sensor_kind_names()));
  }
  const auto si = [&](const char* key, const std::vector<std::string_view>& units, double min, double max,
                      bool min_open, auto&& store) {
    if (j.contains(key) && si_number(c, j[key], at + "." + key, units, v, min, max, min_open)) store(v);
  };
  si("c_farad", {"F"}, 0, 1.0, true, [&](double x) { ch.c_farad = x; });
  si("r1_ohm", {"ohm", "Ω"}, 0, 1e15, true, [&](double x) { ch.r1_ohm = x; });
  si("r2_ohm", {"ohm", "Ω"}, 0, 1e15, false, [&](double x) { ch.r2_ohm = x; });
  if (j.contains("gain") && c.number(j["gain"], at + ".gain", v, 0, 1e6, true)) ch.gain = v;
  int z = 0;
  if (j.contains("zero_code") && c.integer(j["zero_code"], at + ".zero_code", z, -(1 << 23), (1 << 24) - 1)) ch.zero_code = z;
  const auto flag = [&](const char* key, bool& out) {
    if (!j.contains(key)) return;
    if (j[key].is_boolean()) out = j[key].get<bool>();
    else c.fail(at + "." + key, j[key], "must be true or false");
  };
  flag("inverting", ch.inverting);
  flag("leak_correction", ch.leak_correction);
  chain::SensorModel& m = ch.sensor_model;
  if (j.contains("turns") && c.number(j["turns"], at + ".turns", v, 0, 1e9, true)) m.turns = v;
  si("area_m2", {"m²", "m2"}, 0, 1e6, true, [&](double x) { m.area_m2 = x; });
  si("mutual_inductance_h", {"H"}, 0, 1e3, true, [&](double x) { m.mutual_inductance_h = x; });
  si("sensitivity_v_per_m_per_s", {"V/(m/s)", "V·s/m", "Vs/m"}, 0, 1e9, true,
     [&](double x) { m.sensitivity_v_per_m_per_s = x; });
  const bool force = ch.sensor == chain::SensorKind::piezo_force;
  const bool accel = ch.sensor == chain::SensorKind::piezo_acceleration;
  if (j.contains("charge_sensitivity_c_per_n")) {
    if (!force) c.fail(at + ".charge_sensitivity_c_per_n", "applies to sensor piezo_force only (C/N)");
    else si("charge_sensitivity_c_per_n", {"C/N"}, 0, 1.0, true, [&](double x) { m.charge_sensitivity = x; });
  }
  if (j.contains("charge_sensitivity_c_s2_per_m")) {
    if (!accel)
      c.fail(at + ".charge_sensitivity_c_s2_per_m", "applies to sensor piezo_acceleration only (C/(m/s²))");
    else
      si("charge_sensitivity_c_s2_per_m", {"C/(m/s²)", "C·s²/m", "C/(m/s2)"}, 0, 1.0, true,
         [&](double x) { m.charge_sensitivity = x; });
  }
  if (j.contains("baseline")) {
    std::string s;
    if (c.text(j["baseline"], at + ".baseline", s)) {
      if (s == "linear") ch.baseline_model = chain::BaselineModel::linear;
      else if (s == "quadratic") ch.baseline_model = chain::BaselineModel::quadratic;
      else c.fail(at + ".baseline", "must be linear or quadratic, got \"" + s + "\"");
    }
  }
  if (j.contains("robust")) {
    std::string s;
    if (c.text(j["robust"], at + ".robust", s)) {
      if (s == "none") ch.baseline_robust = chain::BaselineRobust::none;
      else if (s == "huber") ch.baseline_robust = chain::BaselineRobust::huber;
      else c.fail(at + ".robust", "must be none or huber, got \"" + s + "\"");
    }
  }
  const std::string kind(chain::to_string(ch.sensor));
  if (needs_r1(ch.sensor) && !ch.r1_ohm)
    c.fail(at + ".r1_ohm", "is required for sensor " + kind + " (the quantity scales with R1*C)");
  if ((ch.sensor == chain::SensorKind::magnetic_flux || ch.sensor == chain::SensorKind::flux_density) &&
      !j.contains("turns"))
    c.fail(at + ".turns", "is required for sensor " + kind + " (coil turns N)");
  if (ch.sensor == chain::SensorKind::flux_density && !(m.area_m2 > 0))
    c.fail(at + ".area_m2", "is required for sensor flux_density (coil area, m²)");
  if (ch.sensor == chain::SensorKind::rogowski_current && !(m.mutual_inductance_h > 0))
    c.fail(at + ".mutual_inductance_h", "is required for sensor rogowski_current (mutual inductance M, H)");
  if (ch.sensor == chain::SensorKind::displacement && !(m.sensitivity_v_per_m_per_s > 0))
    c.fail(at + ".sensitivity_v_per_m_per_s", "is required for sensor displacement (velocity sensitivity G, V/(m/s))");
  if (force && !(m.charge_sensitivity > 0))
    c.fail(at + ".charge_sensitivity_c_per_n", "is required for sensor piezo_force (charge sensitivity, C/N)");
  if (accel && !(m.charge_sensitivity > 0))
    c.fail(at + ".charge_sensitivity_c_s2_per_m",
           "is required for sensor piezo_acceleration (charge sensitivity, C/(m/s²))");
  config.channels[index] = ch;
}

// "path", "usb-serial:SERIAL" or "usb-id:VVVV:PPPP" (hex).
void load_device(const json& j, DaemonConfig& config, Checker& c) {
  std::string s;
  if (!c.text(j, "device", s)) return;
  auto hex4 = [](std::string_view t) {
    return t.size() == 4 && t.find_first_not_of("0123456789abcdefABCDEF") == std::string_view::npos;
  };
  if (s.rfind("usb-id:", 0) == 0) {
    const std::string_view id = std::string_view(s).substr(7);
    if (id.size() != 9 || id[4] != ':' || !hex4(id.substr(0, 4)) || !hex4(id.substr(5)))
      return c.fail("device", j, "usb-id: needs four hex digits of vendor, a colon and four of product (usb-id:0403:6015)");
  } else if (s.rfind("usb-serial:", 0) == 0) {
    if (s.size() == 11) return c.fail("device", j, "usb-serial: needs the adapter's serial number after the colon");
  } else if (s.empty() || s[0] != '/') {
    return c.fail("device", j, "must be an absolute path, usb-serial:SERIAL or usb-id:VVVV:PPPP");
  }
  config.device = s;
}

// "HH:MM" or "HH:MM:SS" -> second of the day.
bool parse_time_of_day(const std::string& t, int& second) {
  const auto two = [&](std::size_t at, int& v) {
    if (at + 2 > t.size() || !isdigit((unsigned char)t[at]) || !isdigit((unsigned char)t[at + 1])) return false;
    v = (t[at] - '0') * 10 + (t[at + 1] - '0');
    return true;
  };
  int h = 0, m = 0, s = 0;
  if (t.size() != 5 && t.size() != 8) return false;
  if (!two(0, h) || t[2] != ':' || !two(3, m)) return false;
  if (t.size() == 8 && (t[5] != ':' || !two(6, s))) return false;
  if (h > 23 || m > 59 || s > 59) return false;
  second = (h * 60 + m) * 60 + s;
  return true;
}

void load_reset_schedule(const json& j, DaemonConfig& config, Checker& c) {
  const std::string at = "reset_schedule";
  if (!c.object(j, at, {"interval_s", "threshold_fraction", "threshold_hysteresis", "calendar"})) return;
  ResetSchedule r;
  double v = 0;
  if (j.contains("interval_s") && c.number(j["interval_s"], at + ".interval_s", v, 0.001, 31.0 * 86400, false))
    r.interval_s = v;
  if (j.contains("threshold_fraction") &&
      c.number(j["threshold_fraction"], at + ".threshold_fraction", v, 0.0, 1.0, true))
    r.threshold_fraction = v;
  if (j.contains("threshold_hysteresis") &&
      c.number(j["threshold_hysteresis"], at + ".threshold_hysteresis", v, 0.0, 1.0)) {
    r.threshold_hysteresis = v;
    if (!r.threshold_fraction)
      c.fail(at + ".threshold_hysteresis", j["threshold_hysteresis"], "needs reset_schedule.threshold_fraction");
    else if (v >= *r.threshold_fraction)
      c.fail(at + ".threshold_hysteresis", j["threshold_hysteresis"],
             "must be below reset_schedule.threshold_fraction, or the threshold never re-arms");
  }
  if (j.contains("calendar")) {
    if (!j["calendar"].is_array()) {
      c.fail(at + ".calendar", j["calendar"], "must be an array of {\"at\": \"HH:MM[:SS]\", ...} objects");
    } else {
      static const std::vector<std::string> days = {"mon", "tue", "wed", "thu", "fri", "sat", "sun"};
      for (std::size_t i = 0; i < j["calendar"].size(); ++i) {
        const json& e = j["calendar"][i];
        const std::string k = at + ".calendar[" + std::to_string(i) + "]";
        if (!c.object(e, k, {"at", "days", "zero_window_s"})) continue;
        CalendarReset cr;
        if (!e.contains("at")) {
          c.fail(k + ".at", "is required (a UTC time of day, \"HH:MM\" or \"HH:MM:SS\")");
        } else {
          std::string t;
          if (c.text(e["at"], k + ".at", t) && !parse_time_of_day(t, cr.second_of_day))
            c.fail(k + ".at", e["at"], "must be a UTC time of day \"HH:MM\" or \"HH:MM:SS\" (00:00 to 23:59:59)");
        }
        if (e.contains("days")) {
          if (!e["days"].is_array() || e["days"].empty()) {
            c.fail(k + ".days", e["days"], "must be a non-empty array of mon, tue, wed, thu, fri, sat, sun");
          } else {
            for (std::size_t d = 0; d < e["days"].size(); ++d) {
              const int w = c.choice(e["days"][d], k + ".days[" + std::to_string(d) + "]", days);
              if (w >= 0) cr.weekdays[std::size_t(w)] = true;
            }
          }
        }
        if (e.contains("zero_window_s")) c.number(e["zero_window_s"], k + ".zero_window_s", cr.zero_window_s, 0, 3600);
        r.calendar.push_back(cr);
      }
    }
  }
  config.reset_schedule = r;
}

void load_zero_windows(const json& j, DaemonConfig& config, Checker& c) {
  if (!j.is_array()) return c.fail("zero_windows", j, "must be an array of {\"from\", \"to\"} objects");
  std::vector<ZeroWindow> out;
  for (std::size_t i = 0; i < j.size(); ++i) {
    const json& e = j[i];
    const std::string k = "zero_windows[" + std::to_string(i) + "]";
    if (!c.object(e, k, {"from", "to", "channels"})) continue;
    ZeroWindow w;
    bool ok = true;
    for (const char* end : {"from", "to"}) {
      const std::string key = k + "." + end;
      std::string t;
      if (!e.contains(end)) {
        c.fail(key, "is required (RFC 3339 time, e.g. 2026-12-01T20:00:00Z)");
        ok = false;
      } else if (!c.text(e[end], key, t)) {
        ok = false;
      } else if (auto u = storage::parse_rfc3339(t)) {
        (std::string_view(end) == "from" ? w.from_unix : w.to_unix) = *u;
      } else {
        c.fail(key, e[end], "is not an RFC 3339 time (YYYY-MM-DDTHH:MM:SSZ or with an offset)");
        ok = false;
      }
    }
    if (ok && w.to_unix <= w.from_unix) c.fail(k + ".to", e["to"], "must be later than " + k + ".from");
    if (e.contains("channels")) {
      if (!e["channels"].is_array()) {
        c.fail(k + ".channels", e["channels"], "must be an array of channel numbers");
      } else {
        for (std::size_t n = 0; n < e["channels"].size(); ++n) {
          int ch = 0;
          if (c.integer(e["channels"][n], k + ".channels[" + std::to_string(n) + "]", ch, 0, 254)) w.channels.push_back(ch);
        }
      }
    }
    out.push_back(w);
  }
  config.zero_windows = out;
}

void load_retention(const json& j, DaemonConfig& config, Checker& c) {
  if (!c.object(j, "retention", {"raw_days", "series_days", "rollup_days"})) return;
  constexpr double kMaxDays = 36500;  // a century: anything longer is a typo
  if (j.contains("raw_days")) c.number(j["raw_days"], "retention.raw_days", config.retention.raw_days, 0, kMaxDays);
  if (j.contains("series_days"))
    c.number(j["series_days"], "retention.series_days", config.retention.series_days, 0, kMaxDays);
  if (j.contains("rollup_days"))
    c.number(j["rollup_days"], "retention.rollup_days", config.retention.rollup_days, 0, kMaxDays);
}

// The writer's queue limits: each from 1 MiB (a smaller queue sheds an ordinary
// commit interval's data) to 64 GiB (beyond is a typo), and soft <= hard.
void load_writer_queue(const json& j, DaemonConfig& config, Checker& c) {
  constexpr double kMinMib = 1.0, kMaxMib = 65536.0;
  bool soft_ok = true, hard_ok = true;
  if (j.contains("writer_queue_soft_limit_mib"))
    soft_ok = c.number(j["writer_queue_soft_limit_mib"], "writer_queue_soft_limit_mib",
                       config.writer_queue_soft_limit_mib, kMinMib, kMaxMib);
  if (j.contains("writer_queue_hard_limit_mib"))
    hard_ok = c.number(j["writer_queue_hard_limit_mib"], "writer_queue_hard_limit_mib",
                       config.writer_queue_hard_limit_mib, kMinMib, kMaxMib);
  if (!soft_ok || !hard_ok) return;  // already reported
  if (!j.contains("writer_queue_soft_limit_mib") && !j.contains("writer_queue_hard_limit_mib")) return;
  if (config.writer_queue_soft_limit_mib > config.writer_queue_hard_limit_mib) {
    std::ostringstream reason;
    reason << "must not exceed writer_queue_hard_limit_mib (" << config.writer_queue_hard_limit_mib
           << (j.contains("writer_queue_hard_limit_mib") ? "" : ", the default")
           << "): raw blocks are shed first, so the soft limit is the lower one";
    c.fail("writer_queue_soft_limit_mib", j.contains("writer_queue_soft_limit_mib") ? j["writer_queue_soft_limit_mib"]
                                                                                   : json(config.writer_queue_soft_limit_mib),
           reason.str());
  }
}

void load_tcp(const json& j, DaemonConfig& config, Checker& c) {
  if (j.is_null()) {
    config.tcp.reset();
    return;
  }
  if (!c.object(j, "tcp", {"address", "port", "token_file", "allow_remote"})) return;
  TcpListen t;
  if (j.contains("address")) c.text(j["address"], "tcp.address", t.address);
  if (!j.contains("port")) c.fail("tcp.port", "is required when tcp is set");
  else c.integer(j["port"], "tcp.port", t.port, 1, 65535);
  if (!j.contains("token_file")) c.fail("tcp.token_file", "is required: TCP clients must present a bearer token");
  else if (c.text(j["token_file"], "tcp.token_file", t.token_file) && (t.token_file.empty() || t.token_file[0] != '/'))
    c.fail("tcp.token_file", j["token_file"], "must be an absolute path");
  if (j.contains("allow_remote")) c.boolean(j["allow_remote"], "tcp.allow_remote", t.allow_remote);
  boost::system::error_code ec;
  const auto addr = asio::ip::make_address(t.address, ec);
  if (ec) c.fail("tcp.address", j.value("address", json(t.address)), "is not an IPv4 or IPv6 address");
  else if (!addr.is_loopback() && !t.allow_remote)
    c.fail("tcp.address", j.value("address", json(t.address)),
           "is not a loopback address; set tcp.allow_remote to true to listen beyond this machine");
  config.tcp = t;
}

}  // namespace

const char* to_string(Parity p) { return p == Parity::none ? "none" : p == Parity::odd ? "odd" : "even"; }
const char* to_string(FlowControl f) {
  return f == FlowControl::none ? "none" : f == FlowControl::hardware ? "hardware" : "software";
}
const char* to_string(ProtocolVariant v) { return v == ProtocolVariant::frames ? "frames" : "text_lines"; }

std::string to_string(const ConfigError& e) {
  return e.value.empty() ? e.key + ": " + e.reason : e.key + " = " + e.value + ": " + e.reason;
}

std::vector<ConfigError> load_config_text(const std::string& text, DaemonConfig& config) {
  std::vector<ConfigError> errors;
  Checker c{errors};
  json j;
  try {
    j = json::parse(text, nullptr, true, /*ignore_comments=*/true);
  } catch (const json::exception& e) {
    // parse_error, and out_of_range for a number too large for a double (found by fuzz.config_loader).
    c.fail("(file)", std::string("is not valid JSON: ") + e.what());
    return errors;
  }
  if (!j.is_object()) {
    c.fail("(file)", "must be a JSON object");
    return errors;
  }
  static const std::set<std::string> known = {
      "device", "baud", "data_bits", "stop_bits", "parity", "flow_control", "reconnect_max_s", "protocol",
      "settle_s", "end_window", "series_interval_s", "channels", "reset_schedule", "zero_windows",
      "database", "commit_interval_ms", "retention", "disk_floor_mb",
      "writer_queue_soft_limit_mib", "writer_queue_hard_limit_mib",
      "socket", "socket_group", "tcp", "log_level", "stop_timeout_s", "api_max_clients", "api_client_buffer_bytes",
      "api_idle_timeout_s", "api_line_timeout_s"};
  for (auto it = j.begin(); it != j.end(); ++it)
    if (!known.count(it.key())) c.fail(it.key(), it.value(), "unknown key");
  if (j.contains("api_max_clients")) c.integer(j["api_max_clients"], "api_max_clients", config.api_max_clients, 1, 4096);
  if (j.contains("api_client_buffer_bytes"))
    c.integer(j["api_client_buffer_bytes"], "api_client_buffer_bytes", config.api_client_buffer_bytes, 4096, 1 << 30);
  if (j.contains("api_idle_timeout_s"))
    c.number(j["api_idle_timeout_s"], "api_idle_timeout_s", config.api_idle_timeout_s, 0.1, 7 * 86400.0);
  if (j.contains("api_line_timeout_s"))
    c.number(j["api_line_timeout_s"], "api_line_timeout_s", config.api_line_timeout_s, 0.1, 3600.0);
  // device and link
  if (j.contains("device")) load_device(j["device"], config, c);
  if (j.contains("baud")) c.integer(j["baud"], "baud", config.baud, 50, 12'000'000);
  if (j.contains("data_bits")) c.integer(j["data_bits"], "data_bits", config.data_bits, 5, 8);
  if (j.contains("stop_bits")) {
    int v = 0;
    if (c.integer(j["stop_bits"], "stop_bits", v, 1, 2)) config.stop_bits = v;
  }
  if (j.contains("parity"))
    if (int i = c.choice(j["parity"], "parity", {"none", "odd", "even"}); i >= 0) config.parity = Parity(i);
  if (j.contains("flow_control"))
    if (int i = c.choice(j["flow_control"], "flow_control", {"none", "hardware", "software"}); i >= 0)
      config.flow_control = FlowControl(i);
  if (j.contains("reconnect_max_s")) c.number(j["reconnect_max_s"], "reconnect_max_s", config.reconnect_max_s, 0.1, 3600);
  if (j.contains("protocol"))
    if (int i = c.choice(j["protocol"], "protocol", {"frames", "text_lines"}); i >= 0)
      config.protocol = ProtocolVariant(i);
  // measurement chain
  if (j.contains("settle_s")) c.number(j["settle_s"], "settle_s", config.settle_s, 0, 10);
  if (j.contains("end_window")) c.integer(j["end_window"], "end_window", config.end_window, 2, 65536);
  if (j.contains("series_interval_s"))
    c.number(j["series_interval_s"], "series_interval_s", config.series_interval_s, 0, 3600, true);
  if (j.contains("channels")) {
    if (!j["channels"].is_array()) {
      c.fail("channels", j["channels"], "must be an array of channel objects");
    } else {
      config.channels.clear();
      for (std::size_t i = 0; i < j["channels"].size(); ++i)
        load_channel(j["channels"][i], "channels[" + std::to_string(i) + "]", config, c);
    }
  }
  if (j.contains("reset_schedule")) load_reset_schedule(j["reset_schedule"], config, c);
  if (j.contains("zero_windows")) load_zero_windows(j["zero_windows"], config, c);
  // storage
  if (j.contains("database")) c.text(j["database"], "database", config.database);
  if (j.contains("commit_interval_ms"))
    c.integer(j["commit_interval_ms"], "commit_interval_ms", config.commit_interval_ms, 10, 60'000);
  if (j.contains("retention")) load_retention(j["retention"], config, c);
  if (j.contains("disk_floor_mb")) c.number(j["disk_floor_mb"], "disk_floor_mb", config.disk_floor_mb, 0, 1e7);
  load_writer_queue(j, config, c);
  // api
  if (j.contains("socket")) c.text(j["socket"], "socket", config.socket_path);
  if (j.contains("socket_group")) c.text(j["socket_group"], "socket_group", config.socket_group);
  if (j.contains("tcp")) load_tcp(j["tcp"], config, c);
  // service
  if (j.contains("log_level")) {
    std::string s;
    if (c.text(j["log_level"], "log_level", s) && !parse_log_level(s, config.log_level))
      c.fail("log_level", j["log_level"], "must be error, warning, notice, info or debug");
  }
  if (j.contains("stop_timeout_s")) c.number(j["stop_timeout_s"], "stop_timeout_s", config.stop_timeout_s, 0.5, 600);
  return errors;
}

std::vector<ConfigError> load_config(const std::string& path, DaemonConfig& config) {
  std::ifstream in(path);
  if (!in) return {{"(file)", "cannot read " + path + ": " + std::strerror(errno), ""}};
  std::stringstream ss;
  ss << in.rdbuf();
  return load_config_text(ss.str(), config);
}

std::vector<ConfigError> validate(const DaemonConfig& config) {
  std::vector<ConfigError> errors;
  auto quoted = [](const std::string& s) { return json(s).dump(); };
  if (config.device.empty() && config.replay_path.empty()) errors.push_back({"device", "is required (a path, usb-serial:SERIAL or usb-id:VVVV:PPPP)"});
  if (config.database.empty()) errors.push_back({"database", "must not be empty"});
  if (config.socket_path.empty()) errors.push_back({"socket", "must not be empty"});
  if (config.socket_path.size() >= 108)
    errors.push_back({"socket", "path is longer than a Unix socket allows (107 bytes)", quoted(config.socket_path)});
  if (!config.socket_group.empty() && getgrnam(config.socket_group.c_str()) == nullptr)
    errors.push_back({"socket_group", "no such group on this machine", quoted(config.socket_group)});
  if (config.tcp) {
    const std::string& f = config.tcp->token_file;
    struct stat st {};
    if (::stat(f.c_str(), &st) != 0) {
      errors.push_back({"tcp.token_file", std::string("cannot be read: ") + std::strerror(errno), quoted(f)});
    } else if (!S_ISREG(st.st_mode)) {
      errors.push_back({"tcp.token_file", "is not a regular file", quoted(f)});
    } else if (st.st_mode & S_IROTH) {
      errors.push_back({"tcp.token_file", "is readable by every user; chmod o-r it", quoted(f)});
    } else if (st.st_size < 16) {
      errors.push_back({"tcp.token_file", "holds fewer than 16 bytes; use a long random token", quoted(f)});
    } else if (::access(f.c_str(), R_OK) != 0) {
      errors.push_back({"tcp.token_file", std::string("cannot be read: ") + std::strerror(errno), quoted(f)});
    }
  }
  return errors;
}

}  // namespace accrue::daemon
