// Config reload plans: what changes in place, what waits for a restart, and
// that a config with errors changes nothing.
#include <catch2/catch.hpp>

#include "daemon/reload.hpp"

using namespace accrue::daemon;

TEST_CASE("reload: a config with errors is refused and the running one kept") {
  DaemonConfig running;
  running.device = "/dev/ttyUSB0";
  running.channels[0].c_farad = 1e-9;
  DaemonConfig fresh = running;
  fresh.channels[0].c_farad = 2e-9;
  const ReloadPlan plan = plan_reload(running, fresh, {{"baud", "must be between 50 and 12000000", "1"}});
  REQUIRE(plan.errors.size() == 1);
  CHECK(plan.applied.empty());
  CHECK(plan.next.channels.at(0).c_farad == 1e-9);
}

TEST_CASE("reload: calibrations, schedule, zero windows and log level change in place") {
  DaemonConfig running;
  DaemonConfig fresh = running;
  fresh.channels[0].c_farad = 2e-9;
  fresh.reset_schedule.interval_s = 60.0;
  fresh.zero_windows.push_back({100.0, 200.0, {}});
  fresh.log_level = accrue::LogLevel::debug;
  const ReloadPlan plan = plan_reload(running, fresh, {});
  CHECK(plan.errors.empty());
  CHECK(plan.applied == std::vector<std::string>{"channels", "reset_schedule", "zero_windows", "log_level"});
  CHECK(plan.need_restart.empty());
  CHECK(plan.next.channels.at(0).c_farad == 2e-9);
  CHECK(*plan.next.reset_schedule.interval_s == 60.0);
}

TEST_CASE("reload: device, storage and socket changes wait for a restart") {
  DaemonConfig running;
  running.device = "/dev/ttyUSB0";
  DaemonConfig fresh = running;
  fresh.device = "/dev/ttyUSB1";
  fresh.database = "other.db";
  fresh.socket_path = "other.sock";
  const ReloadPlan plan = plan_reload(running, fresh, {});
  CHECK(plan.applied.empty());
  CHECK(plan.need_restart == std::vector<std::string>{"device", "database", "socket"});
  CHECK(plan.next.device == "/dev/ttyUSB0");
  CHECK(plan.next.database == running.database);
}

TEST_CASE("reload: the API server's client limit and client buffer wait for a restart") {
  DaemonConfig running;
  DaemonConfig fresh = running;
  fresh.api_max_clients = running.api_max_clients + 1;
  fresh.api_client_buffer_bytes = running.api_client_buffer_bytes * 2;
  const ReloadPlan plan = plan_reload(running, fresh, {});
  CHECK(plan.applied.empty());
  CHECK(plan.need_restart == std::vector<std::string>{"api_max_clients", "api_client_buffer_bytes"});
  CHECK(plan.next.api_max_clients == running.api_max_clients);
}
