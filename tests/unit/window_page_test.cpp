// StoreQueries::window_page: a request for N points over spans from a minute
// to the whole run gets N points (or, below the series interval, one per
// series point), and every bucket equals a plain SQL aggregation of the series
// points the docs/api.md rule puts in it (a bucket holds the rollup rows that
// start in it; a rollup row starts at the first series point of its tier
// bucket). The store is built through storage::Writer, as the daemon builds it.
#include <catch2/catch.hpp>

#include <random>

#include "daemon/api/store_queries.hpp"
#include "storage/rollup.hpp"
#include "storage/writer.hpp"
#include "storage_fixture.hpp"

using namespace accrue;
using namespace accrue::storage;
using namespace accrue::storage::testing;

namespace {

constexpr double kT0 = 1.8e9;
constexpr double kPeriodS = 1e-3;      // 1 kS/s
constexpr std::uint32_t kStride = 1000;  // one series point a second

void build_store(const std::string& path, std::size_t points) {
  std::mt19937_64 rng(7);
  std::normal_distribution<double> noise(0.0, 0.01);
  std::unique_ptr<Writer> w;
  WriterSettings settings;
  settings.raw_keep_s = 0;
  REQUIRE(Writer::open(path, settings, [] { return kT0; }, w, [] { return std::optional<std::uint64_t>(1ull << 40); })
              .ok());
  chain::Calibration cal;
  REQUIRE(w->ensure_calibration(0, cal).ok());
  w->start();
  double total = 0;
  for (std::size_t i = 0; i < points;) {
    Batch b;
    if (i == 0) b.run_start = run_start(1, kPeriodS, kT0);
    ChannelRows rows;
    rows.channel = 0;
    rows.run_id = 1;
    rows.calibration_id = cal.id;
    const std::size_t n = std::min<std::size_t>(points - i, 1 + rng() % 700);
    for (std::size_t k = 0; k < n; ++k, ++i) {
      chain::SeriesPoint p;
      p.first_index = i * kStride;
      p.samples = kStride;
      p.mean_v = 0.002 * double(i % 1009) + noise(rng);
      p.min_v = p.mean_v - std::abs(noise(rng)) - (rng() % 97 == 0 ? 2.0 : 0.0);
      p.max_v = p.mean_v + std::abs(noise(rng));
      p.last_v = p.mean_v + noise(rng);
      total += std::abs(noise(rng));
      p.total = total;
      p.total_u = 1e-4 * double(i + 1);
      rows.output.series.push_back(p);
    }
    b.channels.push_back(std::move(rows));
    w->submit(std::move(b));
  }
  w->stop();
  REQUIRE(w->counters().commit_failures == 0);
  REQUIRE(w->counters().series_points_written == points);
}

// The rollup width (in samples) docs/api.md says a bucket of B samples reads,
// restated from the list of widths there; kStride: the series points.
std::uint64_t documented_tier(std::uint64_t bucket_samples, const std::vector<std::int64_t>& widths_s) {
  std::uint64_t tier = kStride;
  for (std::int64_t w_s : widths_s) {
    const auto w = std::uint64_t(std::llround(double(w_s) / kPeriodS));
    if (w > kStride && w <= bucket_samples) tier = std::max(tier, w);
  }
  return tier;
}

const std::vector<std::int64_t> kDocumentedWidthsS = {2,    5,    10,   20,   30,    60,    120,   300,  600,
                                                      1200, 1800, 3600, 7200, 14400, 21600, 43200, 86400};

// Plain SQL: series points grouped by (start of their tier row) / B, over the
// rows starting in [begin, end] (the points from one tier width either side
// are enough to find where each row starts); the total before comes from the point before
// the first of them.
std::vector<std::vector<double>> sql_buckets(Database& db, std::uint64_t tier, std::uint64_t bucket,
                                             std::uint64_t begin, std::uint64_t end) {
  const std::string t = std::to_string(tier), b = std::to_string(bucket);
  return query(db,
               "WITH p AS (SELECT MIN(first_index) OVER (PARTITION BY first_index / " + t +
                   ") AS row_index, * FROM series_point WHERE run_id = 1 AND channel = 0 AND first_index BETWEEN " +
                   std::to_string(begin - std::min(begin, tier)) + " AND " + std::to_string(end + tier) + "),"
                   " q AS (SELECT * FROM p WHERE row_index BETWEEN " + std::to_string(begin) + " AND " +
                   std::to_string(end) +
                   ")"
                   ", g AS (SELECT row_index / " + b + " * " + b +
                   " AS b, SUM(samples) AS n, MIN(min_v) AS lo, MAX(max_v) AS hi,"
                   " SUM(mean_v * samples) / SUM(samples) AS mean, MIN(first_index) AS f, MAX(first_index) AS l"
                   " FROM q GROUP BY row_index / " + b +
                   ")"
                   " SELECT g.b, g.n, g.lo, g.hi, g.mean, ql.last_v, ql.total, ql.total_u,"
                   " COALESCE((SELECT total FROM series_point s WHERE s.run_id = 1 AND s.derivation = 1 AND s.channel = 0"
                   " AND s.first_index < g.f ORDER BY s.first_index DESC LIMIT 1), qf.total)"
                   " FROM g JOIN series_point AS ql ON (ql.run_id, ql.derivation, ql.channel, ql.first_index) = (1, 1, 0, g.l)"
                   " JOIN series_point AS qf ON (qf.run_id, qf.derivation, qf.channel, qf.first_index) = (1, 1, 0, g.f)"
                   " ORDER BY g.b");
}

void check_window(daemon::api::StoreQueries& queries, Database& db, std::uint64_t from, std::uint64_t to,
                  std::size_t max_points, std::size_t want_points, const std::vector<std::int64_t>& widths_s) {
  INFO("window " << from << ".." << to << ", " << max_points << " points");
  daemon::api::WindowPage page;
  REQUIRE(queries.window_page(1, 0, from, to, max_points, 100000, 0, std::nullopt, page).ok());
  REQUIRE_FALSE(page.empty);
  CHECK(page.buckets.size() == want_points);
  const std::uint64_t B = page.bucket_samples;
  const std::uint64_t tier = documented_tier(B, widths_s);
  INFO("bucket " << B << " samples, tier " << tier);
  const auto want = sql_buckets(db, tier, B, page.lo / B * B, page.hi / B * B + B - 1);
  REQUIRE(want.size() == page.buckets.size());
  double before = want.front()[8];
  for (std::size_t i = 0; i < want.size(); ++i) {
    const auto& g = page.buckets[i];
    const auto& w = want[i];
    CHECK(double(g.first_index) == w[0]);
    CHECK(double(g.samples) == w[1]);
    CHECK(g.min_v == w[2]);
    CHECK(g.max_v == w[3]);
    CHECK(g.mean_v == Approx(w[4]).epsilon(1e-12));
    CHECK(g.last_v == w[5]);
    CHECK(g.total == w[6]);
    CHECK(g.total_u == w[7]);
    CHECK(g.delta == Approx(w[6] - before).epsilon(1e-12).margin(1e-15));
    before = w[6];
  }
  CHECK(page.quantity == "charge");
}

}  // namespace

TEST_CASE("window_page: each span returns the requested points, and every bucket equals an SQL aggregate") {
  TempDir dir("window_page");
  const std::string path = dir.file("w.db");
  const std::size_t points = 86400 + 5000;  // a day and a bit of 1 s series points at 1 kS/s
  build_store(path, points);
  std::unique_ptr<daemon::api::StoreQueries> queries;
  REQUIRE(daemon::api::StoreQueries::open(path, queries).ok());
  const auto db = open_read_only(path);
  std::mt19937_64 rng(5);
  for (const std::uint64_t span_s : {3600ull, 6 * 3600ull, 86400ull}) {
    const std::uint64_t span = span_s * 1000;
    for (int k = 0; k < 3; ++k) {
      const std::uint64_t from = rng() % (points * kStride - span);
      check_window(*queries, *db, from, from + span - 1, 1000, 1000, kDocumentedWidthsS);
    }
  }
  // Other point counts, and a span not a round number of seconds.
  check_window(*queries, *db, 123456, 123456 + 7'777'777, 37, 37, kDocumentedWidthsS);
  check_window(*queries, *db, 5'000'000, 5'000'000 + 80'000'000, 250, 250, kDocumentedWidthsS);
  // Below the series interval: one point per series point (60 of them in a minute).
  check_window(*queries, *db, 60'000'000, 60'000'000 + 59'999, 1000, 60, kDocumentedWidthsS);
}

TEST_CASE("window_page: a store without the finer tiers reads the next finer tier it has, still exactly") {
  TempDir dir("window_page");
  const std::string path = dir.file("old.db");
  build_store(path, 86400 + 3000);
  {
    // What a store written before the 2 s .. 12 h widths existed holds.
    std::unique_ptr<Database> db;
    REQUIRE(Database::open(path, Database::Mode::read_write_create, db).ok());
    REQUIRE(db->exec("DELETE FROM rollup WHERE width_s NOT IN (10, 60, 600, 3600, 21600, 86400)").ok());
  }
  std::unique_ptr<daemon::api::StoreQueries> queries;
  REQUIRE(daemon::api::StoreQueries::open(path, queries).ok());
  const auto db = open_read_only(path);
  const std::vector<std::int64_t> old_widths = {10, 60, 600, 3600, 21600, 86400};
  check_window(*queries, *db, 1'000'000, 1'000'000 + 3'600'000 - 1, 1000, 1000, old_widths);  // series points
  check_window(*queries, *db, 2'000'000, 2'000'000 + 86'400'000 - 1, 900, 900, old_widths);   // 60 s tier
  check_window(*queries, *db, 0, 80'000'000, 120, 120, old_widths);                           // 600 s tier
}
