// Config zero_windows (UTC spans the user marks quiet) reach the live chains'
// drift baseline through Ingest, the same path as the API's quiet_mark: the
// simulated board (invented scenario) runs with its beam off from 10 s to 20 s
// and the config marks 12..18 s quiet; a baseline must be fitted on exactly
// that span and find the front end's drift.
#include <catch2/catch.hpp>

#include <cmath>

#include "daemon/ingest.hpp"
#include "storage/writer.hpp"
#include "tests/unit/storage_fixture.hpp"
#include "tools/accrue-sim/board_model.hpp"

using namespace accrue;
using storage::testing::TempDir;

namespace {

constexpr double kT0 = 1796155200.0;  // 2026-12-01T20:00:00Z, the scenario's invented night

// Runs the board through Ingest, one block per call, each received at the
// UTC of the sample after it (so the clock model maps index i to kT0 + (i+1) ms).
void record(const std::string& path, daemon::DaemonConfig config) {
  config.database = path;
  std::unique_ptr<storage::Writer> writer;
  double now = kT0;
  REQUIRE(storage::Writer::open(path, storage::WriterSettings{}, [&] { return now; }, writer).ok());
  Logger log(LogLevel::error, false);
  daemon::Ingest ingest(config, *writer, log, [&] { return now; });
  writer->start();
  sim::Scenario s;
  s.duration_s = 30.0;
  s.zero_window_s = 2.0;
  s.front_end.reset_threshold_v = 8.0;
  // Spills of 8 s every 18 s from 2 s: beam on 2..10 s and 20..28 s, off 10..20 s.
  s.beam.start_s = 2.0;
  s.beam.stop_s = 30.0;
  s.beam.spill_period_s = 18.0;
  s.beam.spill_on_s = 8.0;
  s.beam.modulation = 0.0;
  s.seed = 5;
  sim::BoardModel board(s);
  std::vector<std::uint8_t> bytes;
  while (!board.finished()) {
    bytes.clear();
    board.produce(250, bytes);
    now = kT0 + double(board.next_index()) * 1e-3;
    ingest.on_bytes(bytes, now);
    ingest.flush();
  }
  ingest.flush();
  writer->stop();
  REQUIRE(writer->counters().last_error.empty());
}

struct Baseline {
  std::int64_t first = 0, last = 0;
  double slope = 0, se = 0;
};

std::vector<Baseline> baselines(const std::string& path) {
  auto db = storage::testing::open_read_only(path);
  storage::Statement st;
  REQUIRE(db->prepare("SELECT first_index, last_index, slope_v_per_s, slope_se_v_per_s FROM baseline "
                      "WHERE derivation = 1 ORDER BY ordinal",
                      st)
              .ok());
  std::vector<Baseline> out;
  for (;;) {
    bool row = false;
    REQUIRE(st.step(&row).ok());
    if (!row) break;
    out.push_back({st.column_int(0), st.column_int(1), st.column_double(2), st.column_double(3)});
  }
  return out;
}

int quiet_events(const std::string& path) {
  auto db = storage::testing::open_read_only(path);
  storage::Statement st;
  REQUIRE(db->prepare("SELECT count(*) FROM event WHERE kind = 'quiet_window' AND detail LIKE '%config zero_windows[0]%'",
                      st)
              .ok());
  bool row = false;
  REQUIRE(st.step(&row).ok());
  REQUIRE(row);
  return int(st.column_int(0));
}

}  // namespace

TEST_CASE("ingest: config zero_windows become quiet windows of the live baseline", "[daemon][ingest]") {
  TempDir dir("zero-windows");
  daemon::DaemonConfig config;
  daemon::ZeroWindow w;
  w.from_unix = kT0 + 12.0;
  w.to_unix = kT0 + 18.0;
  config.zero_windows.push_back(w);
  const std::string path = dir.file("a.db");
  record(path, config);

  const auto b = baselines(path);
  REQUIRE(b.size() == 2);  // the board's zero window at the start, then the configured span
  // kT0 + 12 s is sample 11999 under the clock model (index i at kT0 + (i+1) ms);
  // one sample of slack either way for the fit's rounding.
  CHECK(std::llabs(b[1].first - 11999) <= 1);
  CHECK(std::llabs(b[1].last - 17999) <= 1);
  // The handbook drift of an inverting integrator with the input at zero:
  // dV/dt = Vos/(R1*C) + Ib/C (DESIGN.md section 4; signs as the simulator's
  // front end), from the scenario's defaults: Vos = 1 mV, R1 = 1 GOhm, C = 1 nF,
  // Ib = 5 pA -> 1e-3 + 5e-3 = 6e-3 V/s.
  const double drift = 1e-3 / (1e9 * 1e-9) + 5e-12 / 1e-9;
  CHECK(std::fabs(std::fabs(b[1].slope) - drift) <= 4 * b[1].se + 1e-6);
  CHECK(b[1].se < 1e-4);
  CHECK(quiet_events(path) == 1);
}

TEST_CASE("ingest: a config zero window before the run changes nothing", "[daemon][ingest]") {
  TempDir dir("zero-windows-past");
  daemon::DaemonConfig config;
  daemon::ZeroWindow w;
  w.from_unix = kT0 - 100.0;
  w.to_unix = kT0 - 50.0;
  config.zero_windows.push_back(w);
  const std::string path = dir.file("a.db");
  record(path, config);
  CHECK(baselines(path).size() == 1);  // only the board's own zero window
  CHECK(quiet_events(path) == 0);
}
