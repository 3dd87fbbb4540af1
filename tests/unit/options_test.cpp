// Config loading: every error kind names its key, echoes the value and gives
// the reason; the shipped example is valid; unknown keys are errors.
#include <sys/stat.h>
#include <unistd.h>

#include <catch2/catch.hpp>
#include <cstdio>
#include <fstream>
#include <string>
#include <vector>

#include "daemon/options.hpp"

using namespace accrue::daemon;

namespace {

std::string joined(const std::vector<ConfigError>& errors) {
  std::string s;
  for (const auto& e : errors) s += to_string(e) + "\n";
  return s;
}

struct Case {
  const char* text;    // config file body
  const char* key;     // the key the first error must name
  const char* value;   // the value it must echo ("" = none)
  const char* reason;  // a phrase the reason must contain
};

}  // namespace

TEST_CASE("options: each error kind names the key, the value and the reason") {
  const std::vector<Case> cases = {
      {R"({ "device": 5 })", "device", "5", "must be a string"},
      {R"({ "device": "ttyUSB0" })", "device", "\"ttyUSB0\"", "absolute path"},
      {R"({ "device": "usb-id:403:6015" })", "device", "\"usb-id:403:6015\"", "four hex digits"},
      {R"({ "device": "usb-serial:" })", "device", "\"usb-serial:\"", "serial number"},
      {R"({ "baud": 12.5 })", "baud", "12.5", "whole number"},
      {R"({ "baud": 10 })", "baud", "10", "between 50 and 12000000"},
      {R"({ "data_bits": 9 })", "data_bits", "9", "between 5 and 8"},
      {R"({ "stop_bits": 3 })", "stop_bits", "3", "between 1 and 2"},
      {R"({ "parity": "mark" })", "parity", "\"mark\"", "must be none, odd or even"},
      {R"({ "flow_control": "rts" })", "flow_control", "\"rts\"", "must be none, hardware or software"},
      {R"({ "protocol": "binary" })", "protocol", "\"binary\"", "must be frames or text_lines"},
      {R"({ "reconnect_max_s": 0 })", "reconnect_max_s", "0", ">= 0.1"},
      {R"({ "settle_s": "2ms" })", "settle_s", "\"2ms\"", "must be a number, got string"},
      {R"({ "series_interval_s": 0 })", "series_interval_s", "0", "> 0"},
      {R"({ "channels": {} })", "channels", "{}", "must be an array"},
      {R"({ "channels": [ 3 ] })", "channels[0]", "3", "must be an object"},
      {R"({ "channels": [ {} ] })", "channels[0].channel", "", "is required"},
      {R"({ "channels": [ {"channel": 0}, {"channel": 0} ] })", "channels[1].channel", "0", "listed twice"},
      {R"({ "channels": [ {"channel": 0, "c_farad": -1e-9} ] })", "channels[0].c_farad", "-1e-09", "> 0"},
      {R"({ "channels": [ {"channel": 0, "sensor": "flux"} ] })", "channels[0].sensor", "\"flux\"", "must be charge"},
      {R"({ "channels": [ {"channel": 0, "inverting": 1} ] })", "channels[0].inverting", "1", "true or false"},
      {R"({ "channels": [ {"channel": 0, "sensor": "volt_seconds"} ] })", "channels[0].r1_ohm", "", "is required"},
      {R"({ "channels": [ {"channel": 0, "capacitance": 1e-9} ] })", "channels[0].capacitance", "1e-09", "unknown key"},
      {R"({ "reset_schedule": [] })", "reset_schedule", "[]", "must be an object"},
      {R"({ "reset_schedule": { "every_s": 60 } })", "reset_schedule.every_s", "60", "unknown key"},
      {R"({ "reset_schedule": { "interval_s": 0 } })", "reset_schedule.interval_s", "0", ">= 0.001"},
      {R"({ "reset_schedule": { "threshold_fraction": 1.5 } })", "reset_schedule.threshold_fraction", "1.5", "<= 1"},
      {R"({ "reset_schedule": { "threshold_hysteresis": 0.1 } })", "reset_schedule.threshold_hysteresis", "0.1",
       "needs reset_schedule.threshold_fraction"},
      {R"({ "reset_schedule": { "threshold_fraction": 0.8, "threshold_hysteresis": 0.9 } })",
       "reset_schedule.threshold_hysteresis", "0.9", "never re-arms"},
      {R"({ "reset_schedule": { "calendar": {} } })", "reset_schedule.calendar", "{}", "must be an array"},
      {R"({ "reset_schedule": { "calendar": [ {} ] } })", "reset_schedule.calendar[0].at", "", "is required"},
      {R"({ "reset_schedule": { "calendar": [ {"at": "24:00"} ] } })", "reset_schedule.calendar[0].at", "\"24:00\"",
       "HH:MM"},
      {R"({ "reset_schedule": { "calendar": [ {"at": "03:30:60"} ] } })", "reset_schedule.calendar[0].at",
       "\"03:30:60\"", "HH:MM:SS"},
      {R"({ "reset_schedule": { "calendar": [ {"at": "03:30:5"} ] } })", "reset_schedule.calendar[0].at",
       "\"03:30:5\"", "HH:MM:SS"},
      {R"({ "reset_schedule": { "calendar": [ {"at": "03:00", "days": ["monday"]} ] } })",
       "reset_schedule.calendar[0].days[0]", "\"monday\"", "must be mon, tue"},
      {R"({ "reset_schedule": { "calendar": [ {"at": "03:00", "days": []} ] } })", "reset_schedule.calendar[0].days",
       "[]", "non-empty"},
      {R"({ "zero_windows": {} })", "zero_windows", "{}", "must be an array"},
      {R"({ "zero_windows": [ {"to": "2026-12-01T20:00:00Z"} ] })", "zero_windows[0].from", "", "is required"},
      {R"({ "zero_windows": [ {"from": "yesterday", "to": "2026-12-01T20:00:00Z"} ] })", "zero_windows[0].from",
       "\"yesterday\"", "RFC 3339"},
      {R"({ "zero_windows": [ {"from": "2026-12-01T20:00:00Z", "to": "2026-12-01T19:00:00Z"} ] })",
       "zero_windows[0].to", "\"2026-12-01T19:00:00Z\"", "later than"},
      {R"({ "zero_windows": [ {"from": "2026-12-01T20:00:00Z", "to": "2026-12-01T21:00:00Z", "channels": [300]} ] })",
       "zero_windows[0].channels[0]", "300", "between 0 and 254"},
      {R"({ "database": null })", "database", "null", "must be a string"},
      {R"({ "commit_interval_ms": 5 })", "commit_interval_ms", "5", "between 10 and 60000"},
      {R"({ "retention": { "raw_days": -1 } })", "retention.raw_days", "-1", ">= 0"},
      {R"({ "retention": { "raw": 14 } })", "retention.raw", "14", "unknown key"},
      {R"({ "disk_floor_mb": "1G" })", "disk_floor_mb", "\"1G\"", "must be a number"},
      {R"({ "writer_queue_soft_limit_mib": 0 })", "writer_queue_soft_limit_mib", "0", ">= 1"},
      {R"({ "writer_queue_hard_limit_mib": -256 })", "writer_queue_hard_limit_mib", "-256", ">= 1"},
      {R"({ "writer_queue_hard_limit_mib": 1e9 })", "writer_queue_hard_limit_mib", "1000000000.0", "<= 65536"},
      {R"({ "writer_queue_soft_limit_mib": "8M" })", "writer_queue_soft_limit_mib", "\"8M\"", "must be a number"},
      {R"({ "writer_queue_soft_limit_mib": 64, "writer_queue_hard_limit_mib": 32 })", "writer_queue_soft_limit_mib",
       "64", "must not exceed writer_queue_hard_limit_mib (32)"},
      {R"({ "writer_queue_soft_limit_mib": 300 })", "writer_queue_soft_limit_mib", "300",
       "must not exceed writer_queue_hard_limit_mib (256, the default)"},
      {R"({ "writer_queue_hard_limit_mib": 4 })", "writer_queue_soft_limit_mib", "8.0",
       "must not exceed writer_queue_hard_limit_mib (4)"},
      {R"({ "socket_group": 20 })", "socket_group", "20", "must be a string"},
      {R"({ "tcp": { "token_file": "/etc/accrue/token" } })", "tcp.port", "", "is required"},
      {R"({ "tcp": { "port": 70000, "token_file": "/etc/accrue/token" } })", "tcp.port", "70000", "between 1 and 65535"},
      {R"({ "tcp": { "port": 7070 } })", "tcp.token_file", "", "bearer token"},
      {R"({ "tcp": { "port": 7070, "token_file": "token" } })", "tcp.token_file", "\"token\"", "absolute path"},
      {R"({ "tcp": { "port": 7070, "token_file": "/t", "address": "localhost" } })", "tcp.address", "\"localhost\"",
       "not an IPv4 or IPv6 address"},
      {R"({ "tcp": { "port": 7070, "token_file": "/t", "address": "0.0.0.0" } })", "tcp.address", "\"0.0.0.0\"",
       "tcp.allow_remote"},
      {R"({ "log_level": "verbose" })", "log_level", "\"verbose\"", "must be error, warning"},
      {R"({ "stop_timeout_s": 0 })", "stop_timeout_s", "0", ">= 0.5"},
      {R"({ "api_idle_timeout_s": 0 })", "api_idle_timeout_s", "0", ">= 0.1"},
      {R"({ "api_idle_timeout_s": "60" })", "api_idle_timeout_s", "\"60\"", "must be a number"},
      {R"({ "api_line_timeout_s": 7200 })", "api_line_timeout_s", "7200", "<= 3600"},
      {R"({ "devise": "/dev/ttyUSB0" })", "devise", "\"/dev/ttyUSB0\"", "unknown key"},
      {R"({ "device": "/dev/ttyUSB0", )", "(file)", "", "not valid JSON"},
      {R"([ 1, 2 ])", "(file)", "", "must be a JSON object"},
  };
  for (const auto& c : cases) {
    INFO("config: " << c.text);
    DaemonConfig config;
    const auto errors = load_config_text(c.text, config);
    INFO("errors: " << joined(errors));
    REQUIRE_FALSE(errors.empty());
    CHECK(errors[0].key == c.key);
    CHECK(errors[0].value == c.value);
    CHECK(errors[0].reason.find(c.reason) != std::string::npos);
    const std::string line = to_string(errors[0]);
    CHECK(line.find(c.key) == 0);
  }
}

TEST_CASE("options: every error in a file is reported, not only the first") {
  DaemonConfig config;
  const auto errors = load_config_text(R"({ "baud": 1, "parity": "x", "colour": "red" })", config);
  INFO(joined(errors));
  REQUIRE(errors.size() == 3);
}

TEST_CASE("options: validate names what needs the whole config or the machine") {
  DaemonConfig config;
  auto errors = validate(config);
  REQUIRE(errors.size() == 1);
  CHECK(errors[0].key == "device");
  CHECK(errors[0].reason.find("is required") != std::string::npos);

  config.device = "/dev/ttyUSB0";
  config.socket_path = std::string(120, 's');
  config.socket_group = "no-such-group-for-accrue";
  errors = validate(config);
  REQUIRE(errors.size() == 2);
  CHECK(errors[0].key == "socket");
  CHECK(errors[0].reason.find("longer than a Unix socket allows") != std::string::npos);
  CHECK(errors[1].key == "socket_group");
  CHECK(errors[1].value == "\"no-such-group-for-accrue\"");
}

TEST_CASE("options: the TCP token file must exist, be private and long enough") {
  char dir_template[] = "/tmp/accrue-options-XXXXXX";
  REQUIRE(mkdtemp(dir_template) != nullptr);
  const std::string dir = dir_template;
  DaemonConfig config;
  config.device = "/dev/ttyUSB0";
  config.tcp = TcpListen{};
  config.tcp->port = 7070;
  config.tcp->token_file = dir + "/token";
  auto first_reason = [&] {
    const auto e = validate(config);
    return e.empty() ? std::string() : e[0].key + ": " + e[0].reason;
  };
  CHECK(first_reason().find("tcp.token_file: cannot be read") == 0);
  { std::ofstream(config.tcp->token_file) << "short"; }
  ::chmod(config.tcp->token_file.c_str(), 0600);
  CHECK(first_reason().find("fewer than 16 bytes") != std::string::npos);
  { std::ofstream(config.tcp->token_file) << "a-long-enough-random-token-0123456789"; }
  ::chmod(config.tcp->token_file.c_str(), 0644);
  CHECK(first_reason().find("readable by every user") != std::string::npos);
  ::chmod(config.tcp->token_file.c_str(), 0640);
  CHECK(first_reason().empty());
  std::remove(config.tcp->token_file.c_str());
  ::rmdir(dir.c_str());
}

TEST_CASE("options: the shipped example config is valid and sets what it documents") {
  DaemonConfig config;
  const auto errors = load_config(std::string(ACCRUE_SOURCE_DIR) + "/systemd/accrued.example.json", config);
  INFO(joined(errors));
  REQUIRE(errors.empty());
  CHECK(config.device == "/dev/accrue-board1");
  CHECK(config.protocol == ProtocolVariant::frames);
  CHECK(config.channels.size() == 2);
  REQUIRE(config.channels.count(1));
  CHECK(config.channels.at(1).sensor == accrue::chain::SensorKind::volt_seconds);
  REQUIRE(config.reset_schedule.interval_s);
  CHECK(*config.reset_schedule.interval_s == 120.0);
  REQUIRE(config.reset_schedule.calendar.size() == 1);
  CHECK(config.reset_schedule.calendar[0].second_of_day == (3 * 60 + 30) * 60);
  CHECK(config.reset_schedule.calendar[0].weekdays[0]);   // Monday
  CHECK_FALSE(config.reset_schedule.calendar[0].weekdays[1]);
  REQUIRE(config.zero_windows.size() == 1);
  // 2026-12-01T20:00:00Z = 1796155200 s (days from 1970-01-01: 20788; 20788*86400 + 20*3600).
  CHECK(config.zero_windows[0].from_unix == 1796155200.0);
  CHECK(config.retention.raw_days == 14.0);
  CHECK(config.disk_floor_mb == 500.0);
  CHECK(config.writer_queue_soft_limit_mib == 8.0);
  CHECK(config.writer_queue_hard_limit_mib == 256.0);
  CHECK_FALSE(config.tcp);
  CHECK(config.log_level == accrue::LogLevel::info);
}

TEST_CASE("options: the writer queue limits are read in MiB, fractions allowed, the soft one at most the hard one") {
  DaemonConfig config;
  CHECK(config.writer_queue_soft_limit_mib == 8.0);  // the defaults the example config and RESULTS.md state
  CHECK(config.writer_queue_hard_limit_mib == 256.0);
  auto errors = load_config_text(R"({ "writer_queue_soft_limit_mib": 2.5, "writer_queue_hard_limit_mib": 2.5 })", config);
  INFO(joined(errors));
  CHECK(errors.empty());  // equal limits are allowed: raw and series points shed at the same depth
  CHECK(config.writer_queue_soft_limit_mib == 2.5);
  CHECK(config.writer_queue_hard_limit_mib == 2.5);
  DaemonConfig low;
  errors = load_config_text(R"({ "writer_queue_hard_limit_mib": 16 })", low);  // above the default soft limit
  CHECK(errors.empty());
  CHECK(low.writer_queue_hard_limit_mib == 16.0);
  CHECK(low.writer_queue_soft_limit_mib == 8.0);
}

TEST_CASE("options: the API idle and unfinished-line timeouts are read in seconds, fractions allowed") {
  DaemonConfig config;
  CHECK(config.api_idle_timeout_s == 60.0);  // the defaults docs/api.md states
  CHECK(config.api_line_timeout_s == 10.0);
  const auto errors = load_config_text(R"({ "api_idle_timeout_s": 2.5, "api_line_timeout_s": 0.5 })", config);
  INFO(joined(errors));
  REQUIRE(errors.empty());
  CHECK(config.api_idle_timeout_s == 2.5);
  CHECK(config.api_line_timeout_s == 0.5);
}

TEST_CASE("options: text-line boards and link framing are carried") {
  DaemonConfig config;
  const auto errors = load_config_text(
      R"({ "protocol": "text_lines", "parity": "even", "data_bits": 7, "stop_bits": 2, "flow_control": "hardware",
           "device": "usb-id:0403:6015" })",
      config);
  REQUIRE(errors.empty());
  CHECK(config.protocol == ProtocolVariant::text_lines);
  CHECK(config.parity == Parity::even);
  CHECK(config.data_bits == 7);
  CHECK(config.stop_bits == 2);
  CHECK(config.flow_control == FlowControl::hardware);
  CHECK(config.device == "usb-id:0403:6015");
}

TEST_CASE("options: a number too large for a double is a config error, not an exception") {
  // Found by tests/fuzz/config_loader_fuzz.cpp: nlohmann::json throws out_of_range (406) here, not parse_error.
  DaemonConfig config;
  std::vector<ConfigError> errors;
  REQUIRE_NOTHROW(errors = load_config_text(R"({ "device": "/dev/ttyUSB0", "baud": 1E1111111111110000000000000000 })", config));
  REQUIRE(errors.size() == 1);
  CHECK(errors[0].key == "(file)");
}
