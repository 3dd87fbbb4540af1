// StoreQueries::window_page below the series interval: while raw blocks are
// kept, a 1-minute window at 1 kS/s gives the 1000 points asked for, each
// bucket's volts equal a plain recomputation from the ADC codes, and its total
// is the linear interpolation between the series points' totals (flagged).
// Without the raw blocks the same request falls back to one point per series
// point. Series points and the run are written through storage::Writer; the
// raw blocks are inserted with SQL (block_codec's encoding), two channels
// interleaved, so the test reads channel 0 out of them.
#include <catch2/catch.hpp>

#include <cmath>
#include <random>

#include "daemon/api/store_queries.hpp"
#include "storage/block_codec.hpp"
#include "storage/writer.hpp"
#include "storage_fixture.hpp"

using namespace accrue;
using namespace accrue::storage;
using namespace accrue::storage::testing;

namespace {

constexpr double kT0 = 1.8e9;
constexpr double kPeriodS = 1e-3;
constexpr std::uint64_t kStride = 1000;       // one series point a second
constexpr std::uint64_t kSamples = 180'000;   // 3 minutes
constexpr std::uint64_t kBlock = 400;         // samples per channel per raw block

// Channel 0's code at a sample: a ramp, a slow sine and a little pseudo-noise.
std::int32_t code_at(std::uint64_t i) {
  const std::uint64_t h = (i * 2654435761u) % 97;
  return std::int32_t(2000 + i / 3 + std::lround(500.0 * std::sin(double(i) * 1e-3)) + std::int64_t(h) - 48);
}
double total_of_point(std::uint64_t point) { return 1e-9 * double(point * point) + 3e-9 * double(point); }

struct Store {
  TempDir dir{"store_queries_raw"};
  std::string path = dir.file("raw.db");
  chain::Calibration cal;

  Store() {
    cal.adc.zero_code = 17;
    cal.adc.bits = 20;
    std::unique_ptr<Writer> w;
    WriterSettings settings;
    settings.raw_keep_s = 0;
    REQUIRE(Writer::open(path, settings, [] { return kT0; }, w, [] { return std::optional<std::uint64_t>(1ull << 40); })
                .ok());
    REQUIRE(w->ensure_calibration(0, cal).ok());
    w->start();
    Batch b;
    b.run_start = run_start(1, kPeriodS, kT0);
    ChannelRows rows;
    rows.channel = 0;
    rows.run_id = 1;
    rows.calibration_id = cal.id;
    for (std::uint64_t p = 0; p < kSamples / kStride; ++p) {
      chain::SeriesPoint s;
      s.first_index = p * kStride;
      s.samples = kStride;
      double sum = 0;
      s.min_v = s.max_v = cal.adc.to_volts(code_at(s.first_index));
      for (std::uint64_t i = s.first_index; i < s.first_index + kStride; ++i) {
        const double v = cal.adc.to_volts(code_at(i));
        s.min_v = std::min(s.min_v, v);
        s.max_v = std::max(s.max_v, v);
        sum += v;
        s.last_v = v;
      }
      s.mean_v = sum / double(kStride);
      s.total = total_of_point(p);
      s.total_u = 1e-12 * double(p + 1);
      rows.output.series.push_back(s);
    }
    b.channels.push_back(std::move(rows));
    w->submit(std::move(b));
    w->stop();
    REQUIRE(w->counters().commit_failures == 0);

    std::unique_ptr<Database> db;
    REQUIRE(Database::open(path, Database::Mode::read_write_create, db).ok());
    REQUIRE(db->exec("BEGIN").ok());
    for (std::uint64_t first = 0; first < kSamples; first += kBlock) {
      std::vector<std::int32_t> codes;
      for (std::uint64_t i = first; i < first + kBlock; ++i) {
        codes.push_back(code_at(i));
        codes.push_back(-7 * code_at(i));  // channel 1: must not leak into channel 0
      }
      std::vector<std::uint8_t> data;
      block_codec::encode(codes, 2, data);
      Statement st;
      REQUIRE(db->prepare("INSERT INTO raw_block(run_id, first_index, channel_count, samples, status, encoding, data)"
                          " VALUES(1, ?, 2, ?, 0, ?, ?)",
                          st)
                  .ok());
      st.bind(1, std::int64_t(first)).bind(2, std::int64_t(kBlock)).bind(3, std::int64_t(block_codec::kDeltaZigzagVarint));
      REQUIRE(sqlite3_bind_blob(st.raw(), 4, data.data(), int(data.size()), SQLITE_TRANSIENT) == SQLITE_OK);
      bool row = false;
      REQUIRE(st.step(&row).ok());
    }
    REQUIRE(db->exec("COMMIT").ok());
  }
};

// The series total interpolated at sample `index`, restated: each point's
// total belongs to its last sample, linear between, flat outside.
double expected_total(std::uint64_t index) {
  const std::uint64_t points = kSamples / kStride;
  if (index < kStride - 1) return total_of_point(0);
  const std::uint64_t p = (index - (kStride - 1)) / kStride;
  if (p + 1 >= points) return total_of_point(points - 1);
  const double f = double(index - (p * kStride + kStride - 1)) / double(kStride);
  return total_of_point(p) + f * (total_of_point(p + 1) - total_of_point(p));
}

}  // namespace

TEST_CASE("store_queries_raw: a 1-minute window at 1 kS/s gives 1000 points from the raw blocks") {
  Store store;
  std::unique_ptr<daemon::api::StoreQueries> queries;
  REQUIRE(daemon::api::StoreQueries::open(store.path, queries).ok());
  const std::uint64_t from = 30'017, to = from + 59'999;
  daemon::api::WindowPage page;
  REQUIRE(queries->window_page(1, 0, from, to, 1000, 100000, 0, std::nullopt, page).ok());
  REQUIRE(page.from_raw);
  CHECK(page.lo == from);
  CHECK(page.hi == to);
  // docs/api.md: at most max_points buckets; whole-sample buckets of 61
  // (60 would let 1001 overlap this unaligned minute) make 984.
  CHECK(page.buckets.size() >= 1000 - 1000 * 1000 / 60'000 - 1);
  CHECK(page.buckets.size() <= 1000);
  const std::uint64_t B = page.bucket_samples;
  CHECK(B < kStride);
  double before = expected_total(from - 1);
  std::uint64_t covered = 0;
  for (const auto& b : page.buckets) {
    const std::uint64_t lo = std::max(from, b.first_index), hi = std::min(to, b.first_index + B - 1);
    INFO("bucket at " << b.first_index);
    double mn = 1e300, mx = -1e300, sum = 0;
    for (std::uint64_t i = lo; i <= hi; ++i) {
      const double v = store.cal.adc.to_volts(code_at(i));
      mn = std::min(mn, v), mx = std::max(mx, v), sum += v;
    }
    CHECK(b.first_index % B == 0);
    CHECK(b.samples == hi - lo + 1);
    CHECK(b.min_v == mn);
    CHECK(b.max_v == mx);
    CHECK(b.mean_v == Approx(sum / double(hi - lo + 1)).epsilon(1e-12));
    CHECK(b.last_v == store.cal.adc.to_volts(code_at(hi)));
    CHECK(b.total == Approx(expected_total(hi)).epsilon(1e-12));
    CHECK(b.delta == Approx(expected_total(hi) - before).epsilon(1e-9).margin(1e-20));
    before = expected_total(hi);
    covered += b.samples;
  }
  CHECK(covered == to - from + 1);
  CHECK(page.quantity == "charge");

  SECTION("pages of 300 buckets join to the same buckets") {
    std::vector<daemon::api::Bucket> joined;
    std::optional<std::uint64_t> start;
    for (int pages = 0; pages < 10; ++pages) {
      daemon::api::WindowPage p;
      REQUIRE(queries->window_page(1, 0, page.lo, page.hi, 1000, 300, B, start, p).ok());
      REQUIRE(p.from_raw);
      joined.insert(joined.end(), p.buckets.begin(), p.buckets.end());
      if (!p.next_start) break;
      start = p.next_start;
    }
    REQUIRE(joined.size() == page.buckets.size());
    for (std::size_t i = 0; i < joined.size(); ++i) {
      CHECK(joined[i].first_index == page.buckets[i].first_index);
      CHECK(joined[i].mean_v == page.buckets[i].mean_v);
      CHECK(joined[i].delta == Approx(page.buckets[i].delta).epsilon(1e-12).margin(1e-20));
    }
  }
  SECTION("an aligned minute gives exactly 1000 points of 60 samples") {
    daemon::api::WindowPage aligned;
    REQUIRE(queries->window_page(1, 0, 60'000, 119'999, 1000, 100000, 0, std::nullopt, aligned).ok());
    REQUIRE(aligned.from_raw);
    CHECK(aligned.bucket_samples == 60);
    CHECK(aligned.buckets.size() == 1000);
  }
  SECTION("a window the series points can fill reads them, not the raw blocks") {
    daemon::api::WindowPage coarse;
    REQUIRE(queries->window_page(1, 0, 0, kSamples - 1, 100, 100000, 0, std::nullopt, coarse).ok());
    CHECK_FALSE(coarse.from_raw);
    CHECK(coarse.bucket_samples >= kStride);
  }
  SECTION("once the raw blocks are gone the same request gives one point per series point") {
    {
      std::unique_ptr<Database> db;
      REQUIRE(Database::open(store.path, Database::Mode::read_write_create, db).ok());
      REQUIRE(db->exec("DELETE FROM raw_block").ok());
    }
    daemon::api::WindowPage series;
    REQUIRE(queries->window_page(1, 0, from, to, 1000, 100000, 0, std::nullopt, series).ok());
    CHECK_FALSE(series.from_raw);
    CHECK(series.bucket_samples == kStride);
    CHECK(series.buckets.size() == 60);
  }
}
