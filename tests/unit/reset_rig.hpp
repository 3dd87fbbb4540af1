#pragma once
// Test helper: a ResetDriver of a two-channel board behind a real
// BoardCommands. Commands sent are kept in `sent`; the test acks them (or
// not) and says, block by block, when the board resets. Header-only, tests only.
#include <catch2/catch.hpp>

#include <string>
#include <vector>

#include "daemon/board_commands.hpp"
#include "daemon/options.hpp"
#include "daemon/reset_driver.hpp"
#include "protocol/messages.hpp"

namespace accrue::test {

using daemon::BlockObservation;
using daemon::BoardCommands;
using daemon::BoardCommandSettings;
using daemon::DaemonConfig;
using daemon::ResetDriver;
using daemon::ResetSchedule;
using protocol::BoardCommand;
using protocol::CommandOp;
namespace capability_bit = protocol::capability_bit;

inline ResetSchedule schedule_from(const std::string& text) {
  DaemonConfig c;
  const auto errors = load_config_text(text, c);
  REQUIRE(errors.empty());
  return c.reset_schedule;
}

struct ResetRig {
  std::vector<BoardCommand> sent;
  struct Ev {
    std::string kind, detail;
    std::uint64_t index;
  };
  std::vector<Ev> events;
  double now = 1796169600.0;  // host clock for BoardCommands (2026-12-02T00:00:00Z)
  BoardCommands commands{BoardCommandSettings{0.5, 3, 32}, [this](const BoardCommand& c) { sent.push_back(c); }};
  ResetDriver driver;
  std::uint8_t capabilities = capability_bit::reset_switch | capability_bit::zero_relay;
  std::int64_t run_id = 1;
  std::uint64_t index = 0;

  explicit ResetRig(ResetSchedule s)
      : driver(
            std::move(s),
            [this](CommandOp op, std::uint32_t arg, ResetDriver::Done done) {
              return commands.submit(op, arg, now, std::move(done));
            },
            [this](const std::string& k, const std::string& d, std::uint64_t i) { events.push_back({k, d, i}); }) {}

  // One block of 100 samples at 1 ms (0.1 s of board time).
  void block(double level0, double level1 = 0.0, std::uint8_t status = 0) {
    index += 100;
    BlockObservation b;
    b.run_id = run_id;
    b.last_index = index - 1;
    b.board_time_s = double(b.last_index) * 1e-3;
    b.utc = 1796169600.0 + b.board_time_s;
    b.status = status;
    b.capabilities = capabilities;
    b.level_fraction = {level0, level1};
    b.full_scale_v = {10.0, 10.0};
    driver.observe(b);
    now += 0.1;
    commands.tick(now);
  }
  int count(const std::string& kind) const {
    int n = 0;
    for (const auto& e : events) n += e.kind == kind;
    return n;
  }
};

}  // namespace accrue::test
