// Reprocessing a stored run (storage/reprocess.hpp): a run is recorded through
// the daemon's own path (simulated board frames -> Ingest -> chain -> Writer),
// then recomputed from its raw blocks as new derivations.
#include <catch2/catch.hpp>

#include <cfloat>
#include <cmath>
#include <cstring>
#include <map>

#include "daemon/api/store_queries.hpp"
#include "daemon/ingest.hpp"
#include "protocol/encoder.hpp"
#include "storage/reader.hpp"
#include "storage/reprocess.hpp"
#include "storage/writer.hpp"
#include "tests/unit/storage_fixture.hpp"
#include "tools/accrue-sim/board_model.hpp"

using namespace accrue;
using storage::testing::TempDir;

namespace {

constexpr double kT0 = 1796155200.0;  // 2026-12-01T20:00:00Z, the scenario's invented night

// An invented scenario, scaled down: 90 s at 1 kS/s of a 100 pA beam into 1 nF,
// resets at 1 V (about every 7 s), a zero window at the start and a second one
// commanded at 40..42 s.
sim::Scenario scenario() {
  sim::Scenario s;
  s.duration_s = 90.0;
  s.zero_window_s = 2.0;
  s.front_end.reset_threshold_v = 1.0;
  s.beam.start_s = 1.0;
  s.beam.stop_s = 89.0;
  s.seed = 11;
  return s;
}

// Records one run into `path` the way accrued does; returns the simulator.
void record(const std::string& path) {
  daemon::DaemonConfig config;
  config.database = path;
  std::unique_ptr<storage::Writer> writer;
  double now = kT0;
  REQUIRE(storage::Writer::open(path, storage::WriterSettings{}, [&] { return now; }, writer).ok());
  Logger log(LogLevel::error, false);
  daemon::Ingest ingest(config, *writer, log, [&] { return now; });
  writer->start();
  sim::BoardModel board(scenario());
  std::vector<std::uint8_t> bytes;
  const std::uint64_t per_call = 5000;
  bool zero_open = false, zero_closed = false;
  while (!board.finished()) {
    bytes.clear();
    const double t = double(board.next_index()) * 1e-3;
    if (t >= 40.0 && !zero_open) {
      board.command({1, protocol::CommandOp::zero_relay, 1}, bytes);
      zero_open = true;
    }
    if (t >= 42.0 && !zero_closed) {
      board.command({2, protocol::CommandOp::zero_relay, 0}, bytes);
      zero_closed = true;
    }
    board.produce(per_call, bytes);
    now += 0.05;
    ingest.on_bytes(bytes, kT0 + t);
    ingest.flush();
  }
  ingest.flush();
  writer->stop();
  REQUIRE(writer->counters().last_error.empty());
  REQUIRE_FALSE(ingest.run_active());  // the board's stream_end ended the run
}

// A fresh recording per test case, copied from one made once (the recording is the slow part).
std::string recorded(const TempDir& dir) {
  static TempDir master("reprocess-master");
  static const std::string master_db = [] {
    const std::string p = master.file("night.db");
    record(p);
    return p;
  }();
  const std::string p = dir.file("night.db");
  std::filesystem::copy_file(master_db, p);
  return p;
}

std::string text_of(const std::string& path, const std::string& sql) {
  auto db = storage::testing::open_read_only(path);
  storage::Statement st;
  const storage::Status s = db->prepare(sql, st);
  INFO(s.message);
  REQUIRE(s.ok());
  bool row = false;
  REQUIRE(st.step(&row).ok());
  REQUIRE(row);
  return st.column_text(0);
}

// Every column of a derivation's rows of `table` except the derivation, as exact text (quote() writes
// doubles with all 17 digits, so equal text means equal bits).
std::string rows_of(const std::string& path, const std::string& table, const std::string& columns, int derivation) {
  return text_of(path, "SELECT COALESCE(group_concat(r, '\n'), '') FROM (SELECT " + columns + " AS r FROM " + table +
                           " WHERE run_id = 1 AND derivation = " + std::to_string(derivation) +
                           " ORDER BY channel, 2)");
}
const std::string kSegmentCols =
    "quote(channel)||','||quote(ordinal)||','||quote(first_index)||','||quote(last_index)||','||quote(start_v)||','||"
    "quote(end_v)||','||quote(drift_v)||','||quote(gap_before_v)||','||quote(gap_before_u_v)||','||"
    "quote(end_points_u_v)||','||quote(quantity)||','||quote(baseline_ordinal)||','||quote(flags)||','||"
    "quote(total_after)||','||quote(total_u_after)||','||quote(calibration_id), ordinal";
const std::string kSeriesCols =
    "quote(channel)||','||quote(first_index)||','||quote(samples)||','||quote(min_v)||','||quote(max_v)||','||"
    "quote(mean_v)||','||quote(last_v)||','||quote(total)||','||quote(total_u)||','||quote(calibration_id), first_index";
const std::string kBaselineCols =
    "quote(channel)||','||quote(ordinal)||','||quote(first_index)||','||quote(last_index)||','||quote(samples)||','||"
    "quote(intercept_v)||','||quote(slope_v_per_s)||','||quote(slope_se_v_per_s)||','||quote(residual_rms_v), ordinal";

std::string everything_of(const std::string& path, int derivation) {
  return rows_of(path, "segment", kSegmentCols, derivation) + "|" + rows_of(path, "series_point", kSeriesCols, derivation) +
         "|" + rows_of(path, "baseline", kBaselineCols, derivation) + "|" +
         text_of(path, "SELECT COALESCE(group_concat(quote(total)||quote(bucket)), '') FROM rollup WHERE derivation = " +
                           std::to_string(derivation));
}

storage::ReprocessResult reprocess(const std::string& path, storage::ReprocessRequest req) {
  storage::ReprocessResult r;
  const storage::Status s = storage::reprocess(path, req, [] { return kT0 + 86400.0; }, {}, r);
  INFO(s.message);
  REQUIRE(s.ok());
  return r;
}

storage::ReprocessRequest request(std::string reason) {
  storage::ReprocessRequest req;
  req.run_id = 1;
  req.who = "test";
  req.reason = std::move(reason);
  req.blocks_per_transaction = 37;  // many small transactions: the grouping must not matter
  return req;
}

bool same_bits(double a, double b) { return std::memcmp(&a, &b, sizeof a) == 0; }

}  // namespace

TEST_CASE("reprocess: the live recording is derivation 1 with its chain settings, calibration and total") {
  TempDir dir("reprocess");
  const std::string db = recorded(dir);
  std::unique_ptr<storage::Reader> reader;
  REQUIRE(storage::Reader::open(db, reader).ok());
  std::vector<storage::DerivationInfo> ds;
  REQUIRE(reader->derivations(1, ds).ok());
  REQUIRE(ds.size() == 1);
  CHECK(ds[0].derivation == 1);
  CHECK(ds[0].state == "recorded");
  CHECK(ds[0].who == "accrued");
  CHECK_FALSE(ds[0].finished_utc.empty());  // the run ended
  REQUIRE(ds[0].channels.size() == 1);
  const auto& c = ds[0].channels[0];
  CHECK(c.baseline == "linear none");
  CHECK(c.settings.find("\"settle_s\"") != std::string::npos);
  CHECK(c.start_state.empty());  // the first run starts from zero
  std::vector<storage::CheckpointRow> checkpoints;
  REQUIRE(reader->checkpoints(checkpoints).ok());
  REQUIRE(checkpoints.size() == 1);
  REQUIRE(c.total);
  CHECK(same_bits(*c.total, checkpoints[0].total));
  CHECK(c.segments == checkpoints[0].segments);
  CHECK(c.segments >= 5);  // resets every several seconds: a real stitching job
  CHECK(text_of(db, "SELECT count(*) FROM baseline WHERE derivation = 1") == "2");  // both zero windows
}

TEST_CASE("reprocess: with the original calibration reproduces segments, series and baselines exactly and totals bit for bit") {
  TempDir dir("reprocess");
  const std::string db = recorded(dir);
  const std::string original = everything_of(db, 1);
  const auto r = reprocess(db, request("identity check"));
  CHECK(r.derivation == 2);
  CHECK(r.parent == 1);
  CHECK(r.index_gaps == 0);
  CHECK_FALSE(r.run_open);
  CHECK(rows_of(db, "segment", kSegmentCols, 2) == rows_of(db, "segment", kSegmentCols, 1));
  CHECK(rows_of(db, "series_point", kSeriesCols, 2) == rows_of(db, "series_point", kSeriesCols, 1));
  CHECK(rows_of(db, "baseline", kBaselineCols, 2) == rows_of(db, "baseline", kBaselineCols, 1));
  // Rollups: the same buckets, counts, extremes and totals (sum_v may round differently, see reprocess.hpp).
  const std::string rollup_cols = "SELECT COALESCE(group_concat(quote(width_s)||quote(bucket)||quote(points)||quote(samples)||"
                                  "quote(min_v)||quote(max_v)||quote(total)||quote(total_u)), '') FROM (SELECT * FROM rollup"
                                  " WHERE derivation = ";
  CHECK(text_of(db, rollup_cols + "2 ORDER BY width_s, bucket)") == text_of(db, rollup_cols + "1 ORDER BY width_s, bucket)"));
  CHECK(text_of(db, "SELECT max(abs(a.sum_v - b.sum_v) / max(abs(a.sum_v), 1e-300)) < 1e-12 FROM rollup a JOIN rollup b"
                    " USING (run_id, channel, width_s, bucket) WHERE a.derivation = 1 AND b.derivation = 2") == "1");
  std::unique_ptr<storage::Reader> reader;
  REQUIRE(storage::Reader::open(db, reader).ok());
  std::vector<storage::CheckpointRow> checkpoints;
  REQUIRE(reader->checkpoints(checkpoints).ok());
  REQUIRE(r.channels.size() == 1);
  CHECK(same_bits(r.channels[0].total, checkpoints[0].total));
  CHECK(same_bits(r.channels[0].std_uncertainty, checkpoints[0].std_uncertainty));
  CHECK(r.channels[0].calibration_id == checkpoints[0].calibration_id);  // no new calibration version
  CHECK(everything_of(db, 1) == original);
}

TEST_CASE("reprocess: a corrected feedback capacitor scales every charge by C_new/C_old and leaves the original alone") {
  TempDir dir("reprocess");
  const std::string db = recorded(dir);
  const std::string original = everything_of(db, 1);
  auto req = request("C was 1.02 nF, not 1.00 nF");
  storage::ChannelChange change;
  change.channel = 0;
  change.c_farad = 1.02e-9;
  req.changes.push_back(change);
  const auto r = reprocess(db, req);
  REQUIRE(r.channels.size() == 1);
  REQUIRE(r.channels[0].parent_total);
  // Q = -C*dV (charge amplifier, DESIGN.md §4): the volts are the same, so every charge scales by
  // exactly 1.02. Floating point: each charge is one product (rounded, relative error <= u = 2^-53),
  // the ratio of two adds one more rounding, and the doubles 1e-9 and 1.02e-9 are each within u of
  // their decimal values: |ratio/1.02 - 1| <= 5u; 6u is allowed.
  const double u = std::ldexp(1.0, -53);
  const double ratio = r.channels[0].total / *r.channels[0].parent_total;
  CHECK(std::fabs(ratio / 1.02 - 1.0) <= 6 * u);
  const double parent_u = std::stod(text_of(db, "SELECT quote(std_uncertainty) FROM derivation_channel WHERE derivation = 1"));
  CHECK(std::fabs(r.channels[0].std_uncertainty / parent_u / 1.02 - 1.0) <= 6 * u);  // the same bound, |Q| scales too
  CHECK(text_of(db, "SELECT count(*) FROM segment a JOIN segment b USING (run_id, channel, ordinal) WHERE a.derivation = 1"
                    " AND b.derivation = 2 AND abs(b.quantity / a.quantity / 1.02 - 1) > 1.4e-15") == "0");
  CHECK(text_of(db, "SELECT count(*) FROM segment WHERE derivation = 2") ==
        text_of(db, "SELECT count(*) FROM segment WHERE derivation = 1"));
  // A new immutable calibration version, named by the new rows; the old one is still there.
  CHECK(r.channels[0].calibration_id != std::stoll(text_of(db, "SELECT calibration_id FROM derivation_channel WHERE derivation = 1")));
  CHECK(text_of(db, "SELECT json_extract(definition, '$.front_end.c_farad') FROM calibration WHERE calibration_id = " +
                        std::to_string(r.channels[0].calibration_id)) == "1.02e-09");
  CHECK(text_of(db, "SELECT count(DISTINCT calibration_id) FROM segment WHERE derivation = 2") == "1");
  // Provenance.
  CHECK(text_of(db, "SELECT who || '|' || reason || '|' || state || '|' || parent FROM derivation WHERE derivation = 2") ==
        "test|C was 1.02 nF, not 1.00 nF|complete|1");
  CHECK(text_of(db, "SELECT json_extract(changes, '$.channels.0.c_farad.to') FROM derivation WHERE derivation = 2") ==
        "1.02e-09");
  CHECK(everything_of(db, 1) == original);
}

TEST_CASE("reprocess: dropping a spoiled zero window changes only the segments that used its baseline") {
  TempDir dir("reprocess");
  const std::string db = recorded(dir);
  // Baseline 2 is the zero window commanded at 40..42 s.
  const auto first2 = std::stoull(text_of(db, "SELECT first_index FROM baseline WHERE derivation = 1 AND ordinal = 2"));
  const double slope1 = std::stod(text_of(db, "SELECT quote(slope_v_per_s) FROM baseline WHERE derivation = 1 AND ordinal = 1"));
  auto req = request("zero window at 40 s spoiled by a glitch");
  storage::ChannelChange change;
  change.drop_baselines.push_back(2);
  req.changes.push_back(change);
  const auto r = reprocess(db, req);
  CHECK(text_of(db, "SELECT count(*) FROM baseline WHERE derivation = 2") == "1");
  struct Seg {
    std::uint64_t first = 0, last = 0;
    double quantity = 0, drift = 0;
    int baseline = 0;
  };
  const auto segments = [&](int derivation) {
    auto con = storage::testing::open_read_only(db);
    std::vector<Seg> out;
    for (const auto& row : storage::testing::query(*con, "SELECT first_index, last_index, quantity, drift_v, baseline_ordinal"
                                                         " FROM segment WHERE derivation = " + std::to_string(derivation) +
                                                         " ORDER BY ordinal"))
      out.push_back({std::uint64_t(row[0]), std::uint64_t(row[1]), row[2], row[3], int(row[4])});
    return out;
  };
  const auto before = segments(1), after = segments(2);
  REQUIRE(before.size() == after.size());  // the window is dead time either way: the same segments
  std::size_t unchanged = 0, changed = 0;
  for (std::size_t k = 0; k < before.size(); ++k) {
    INFO("segment " << k + 1);
    CHECK(before[k].first == after[k].first);
    CHECK(before[k].last == after[k].last);
    if (before[k].baseline != 2) {
      // Fitted before the window: nothing changes, to the bit.
      CHECK(same_bits(before[k].quantity, after[k].quantity));
      CHECK(same_bits(before[k].drift, after[k].drift));
      ++unchanged;
    } else {
      // After it, baseline 1 stays in force: drift = slope1 * (t_last - t_first) (linear model).
      CHECK(after[k].baseline == 1);
      CHECK(after[k].first > first2);
      const double length_s = double(after[k].last) * 1e-3 - double(after[k].first) * 1e-3;
      CHECK(after[k].drift == Approx(slope1 * length_s).epsilon(1e-12));
      CHECK_FALSE(same_bits(before[k].drift, after[k].drift));
      ++changed;
    }
  }
  CHECK(unchanged >= 3);
  CHECK(changed >= 3);
  CHECK(text_of(db, "SELECT json_extract(changes, '$.channels.0.baselines_dropped[0].ordinal') FROM derivation"
                    " WHERE derivation = 2") == "2");
}

TEST_CASE("reprocess: queries name a derivation, and read the newest complete one by default") {
  TempDir dir("reprocess");
  const std::string db = recorded(dir);
  auto req = request("C was 1.02 nF");
  storage::ChannelChange change;
  change.c_farad = 1.02e-9;
  req.changes.push_back(change);
  reprocess(db, req);
  std::unique_ptr<storage::Reader> reader;
  REQUIRE(storage::Reader::open(db, reader).ok());
  const auto total_of = [&](std::optional<int> derivation, int& read) {
    storage::WindowQuery q;
    q.derivation = derivation;
    q.max_points = 10;
    storage::WindowResult w;
    const storage::Status s = reader->window(q, w);
    INFO(s.message);
    REQUIRE(s.ok());
    REQUIRE_FALSE(w.points.empty());
    read = w.derivation;
    return w.points.back().total;
  };
  int read = 0;
  const double t1 = total_of(1, read);
  CHECK(read == 1);
  const double t2 = total_of(2, read);
  CHECK(read == 2);
  CHECK(total_of(std::nullopt, read) == t2);
  CHECK(read == 2);
  CHECK(t2 / t1 == Approx(1.02).epsilon(1e-12));
  storage::WindowQuery missing;
  missing.derivation = 7;
  storage::WindowResult w;
  CHECK_FALSE(reader->window(missing, w).ok());

  std::unique_ptr<daemon::api::StoreQueries> queries;
  REQUIRE(daemon::api::StoreQueries::open(db, queries).ok());
  std::vector<daemon::api::SegmentRow> s1, s2, newest;
  REQUIRE(queries->segments(1, 0, 0, INT64_MAX, 0, 1000, s1, 1).ok());
  REQUIRE(queries->segments(1, 0, 0, INT64_MAX, 0, 1000, s2, 2).ok());
  REQUIRE(queries->segments(1, 0, 0, INT64_MAX, 0, 1000, newest).ok());
  REQUIRE(s1.size() == s2.size());
  CHECK(s2.back().total_after == newest.back().total_after);
  CHECK(s2.back().total_after / s1.back().total_after == Approx(1.02).epsilon(1e-12));
  daemon::api::WindowPage p1, p2;
  REQUIRE(queries->window_page(1, 0, 0, INT64_MAX, 10, 100, 0, std::nullopt, p1, 1).ok());
  REQUIRE(queries->window_page(1, 0, 0, INT64_MAX, 10, 100, 0, std::nullopt, p2).ok());
  CHECK(p2.buckets.back().total / p1.buckets.back().total == Approx(1.02).epsilon(1e-12));

  // A second correction builds on the newest by default, and records which one.
  const auto r3 = reprocess(db, request("again, robust baseline"));
  CHECK(r3.derivation == 3);
  CHECK(r3.parent == 2);
  std::vector<storage::DerivationInfo> ds;
  REQUIRE(reader->derivations(1, ds).ok());
  REQUIRE(ds.size() == 3);
  CHECK(ds[2].parent == 2);
  CHECK(ds[2].channels.at(0).calibration_id == ds[1].channels.at(0).calibration_id);
}

TEST_CASE("reprocess: a cancelled or refused reprocessing leaves no readable derivation and the default unchanged") {
  TempDir dir("reprocess");
  const std::string db = recorded(dir);
  const std::string original = everything_of(db, 1);
  storage::ReprocessResult r;
  int calls = 0;
  const storage::Status cancelled = storage::reprocess(db, request("cancel me"), [] { return kT0; },
                                                      [&](const storage::ReprocessProgress& p) {
                                                        CHECK(p.blocks_total > 0);
                                                        CHECK(p.blocks_done <= p.blocks_total);
                                                        return ++calls < 3;
                                                      },
                                                      r);
  CHECK_FALSE(cancelled.ok());
  CHECK(cancelled.message == "cancelled");
  CHECK(text_of(db, "SELECT state FROM derivation WHERE derivation = 2") == "failed");
  CHECK(text_of(db, "SELECT count(*) FROM segment WHERE derivation = 2") == "0");
  CHECK(text_of(db, "SELECT derivation FROM derivation_newest WHERE run_id = 1") == "1");

  const auto refused = [&](storage::ReprocessRequest req, const std::string& words) {
    storage::ReprocessResult out;
    const storage::Status s = storage::reprocess(db, req, [] { return kT0; }, {}, out);
    CHECK_FALSE(s.ok());
    INFO(s.message);
    CHECK(s.message.find(words) != std::string::npos);
  };
  auto no_run = request("x");
  no_run.run_id = 9;
  refused(no_run, "no run 9");
  auto bad_c = request("x");
  bad_c.changes.push_back({});
  bad_c.changes.back().c_farad = -1e-9;
  refused(bad_c, "c_farad must be a positive number");
  auto no_baseline = request("x");
  no_baseline.changes.push_back({});
  no_baseline.changes.back().drop_baselines.push_back(9);
  refused(no_baseline, "no baseline 9");
  auto no_channel = request("x");
  no_channel.changes.push_back({});
  no_channel.changes.back().channel = 3;
  refused(no_channel, "no channel 3");
  auto failed_parent = request("x");
  failed_parent.parent = 2;
  refused(failed_parent, "no derivation 2 that can be read");
  CHECK(text_of(db, "SELECT count(*) FROM derivation") == "2");  // refusals create nothing
  CHECK(everything_of(db, 1) == original);
}
