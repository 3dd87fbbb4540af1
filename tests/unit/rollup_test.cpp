// Rollup tiers: buckets built incrementally by the Writer equal a brute-force
// aggregation of the series points submitted, window queries agree with a
// brute-force aggregation of what they cover, and the rows a window query
// reads do not grow with its span.
#include <catch2/catch.hpp>

#include <algorithm>
#include <map>
#include <set>
#include <random>

#include "storage/reader.hpp"
#include "storage/rollup.hpp"
#include "storage_fixture.hpp"

using namespace accrue;
using namespace accrue::storage;
using namespace accrue::storage::testing;

namespace {

constexpr double kT0 = 1.8e9;

struct Agg {
  std::uint64_t first_index = 0, points = 0, samples = 0;
  double min_v = 1e300, max_v = -1e300, sum_v = 0, last_v = 0, total = 0, total_u = 0;
  void add(const chain::SeriesPoint& p) {
    if (points == 0) first_index = p.first_index;
    ++points;
    samples += p.samples;
    min_v = std::min(min_v, p.min_v);
    max_v = std::max(max_v, p.max_v);
    sum_v += p.mean_v * p.samples;
    last_v = p.last_v;
    total = p.total;
    total_u = p.total_u;
  }
};

// Random series points: one per interval, values of a noisy ramp with spikes.
std::vector<chain::SeriesPoint> make_points(std::size_t n, std::uint32_t samples, std::mt19937_64& rng) {
  std::normal_distribution<double> noise(0.0, 0.01);
  std::vector<chain::SeriesPoint> pts;
  double total = 0;
  for (std::size_t i = 0; i < n; ++i) {
    chain::SeriesPoint p;
    p.first_index = i * samples;
    p.samples = samples;
    p.mean_v = 0.001 * double(i % 997) + noise(rng);
    p.min_v = p.mean_v - std::abs(noise(rng)) - (rng() % 50 == 0 ? 3.0 : 0.0);
    p.max_v = p.mean_v + std::abs(noise(rng));
    p.last_v = p.mean_v + noise(rng);
    total += std::abs(noise(rng));
    p.total = total;
    p.total_u = 1e-3 * std::sqrt(double(i + 1));
    pts.push_back(p);
  }
  return pts;
}

// Submits the points in batches of random size (buckets straddle batches).
void write_points(const std::string& path, const std::vector<chain::SeriesPoint>& pts, double period_s,
                  std::mt19937_64& rng, std::size_t max_batch) {
  std::unique_ptr<Writer> w;
  WriterSettings settings;
  settings.raw_keep_s = 0;
  REQUIRE(Writer::open(path, settings, [] { return kT0; }, w, [] { return std::optional<std::uint64_t>(1ull << 40); })
              .ok());
  chain::Calibration cal;
  REQUIRE(w->ensure_calibration(0, cal).ok());
  w->start();
  bool first = true;
  for (std::size_t i = 0; i < pts.size();) {
    const std::size_t n = std::min(pts.size() - i, 1 + std::size_t(rng() % max_batch));
    Batch b;
    if (first) b.run_start = run_start(1, period_s, kT0);
    first = false;
    ChannelRows rows;
    rows.channel = 0;
    rows.run_id = 1;
    rows.calibration_id = cal.id;
    rows.output.series.assign(pts.begin() + std::ptrdiff_t(i), pts.begin() + std::ptrdiff_t(i + n));
    b.channels.push_back(std::move(rows));
    w->submit(std::move(b));
    i += n;
  }
  w->stop();
  REQUIRE(w->counters().commit_failures == 0);
  REQUIRE(w->counters().series_points_written == pts.size());
}

}  // namespace

TEST_CASE("rollup: every stored bucket equals a brute-force aggregation of the series points") {
  TempDir dir("rollup");
  const std::string path = dir.file("rollup.db");
  std::mt19937_64 rng(5);
  const double period_s = 1e-3;
  const auto pts = make_points(4 * 3600 + 17, 1000, rng);  // four hours of 1 s points
  write_points(path, pts, period_s, rng, 700);
  auto db = open_read_only(path);
  for (std::int64_t width_s : rollup::kWidthsS) {
    INFO("width " << width_s << " s");
    const std::uint64_t ws = rollup::width_samples(width_s, period_s);
    std::map<std::uint64_t, Agg> want;
    for (const auto& p : pts) want[p.first_index / ws].add(p);
    const auto got = query(*db, "SELECT bucket, first_index, points, samples, min_v, max_v, sum_v, last_v, total, total_u"
                                " FROM rollup WHERE width_s = " + std::to_string(width_s) + " ORDER BY bucket");
    REQUIRE(got.size() == want.size());
    std::size_t i = 0;
    for (const auto& [bucket, a] : want) {
      const auto& r = got[i++];
      CHECK(r[0] == double(bucket));
      CHECK(r[1] == double(a.first_index));
      CHECK(r[2] == double(a.points));
      CHECK(r[3] == double(a.samples));
      CHECK(r[4] == a.min_v);
      CHECK(r[5] == a.max_v);
      CHECK(r[6] == Approx(a.sum_v).epsilon(1e-12));  // summed in another order
      CHECK(r[7] == a.last_v);
      CHECK(r[8] == a.total);
      CHECK(r[9] == a.total_u);
    }
  }
}

TEST_CASE("rollup: window queries on random windows equal a brute-force aggregation of what they cover") {
  TempDir dir("rollup");
  const std::string path = dir.file("window.db");
  std::mt19937_64 rng(11);
  const double period_s = 1e-3;
  const std::uint32_t per_point = 1000;
  const auto pts = make_points(6 * 3600, per_point, rng);
  write_points(path, pts, period_s, rng, 2000);
  std::unique_ptr<Reader> reader;
  REQUIRE(Reader::open(path, reader).ok());
  const std::uint64_t end_index = pts.back().first_index + per_point;
  std::set<std::int64_t> tiers_seen;
  for (int trial = 0; trial < 200; ++trial) {
    WindowQuery q;
    q.from_index = rng() % end_index;
    q.to_index = q.from_index + rng() % (end_index - q.from_index);
    q.max_points = 1 + rng() % 300;
    INFO("window " << q.from_index << ".." << q.to_index << " points " << q.max_points);
    WindowResult r;
    REQUIRE(reader->window(q, r).ok());
    tiers_seen.insert(r.tier_width_s);
    // Series points whose first index lies in the window.
    std::vector<chain::SeriesPoint> inside;
    for (const auto& p : pts)
      if (p.first_index >= q.from_index && p.first_index <= q.to_index) inside.push_back(p);
    if (inside.empty()) {
      CHECK(r.points.empty());
      continue;
    }
    REQUIRE(!r.points.empty());
    CHECK(r.points.size() <= q.max_points);
    // Returned points cover whole buckets: from the first one's start to the
    // end of the bucket holding the last point inside the window.
    const std::uint64_t ws = r.tier_width_s ? rollup::width_samples(r.tier_width_s, period_s) : per_point;
    const std::uint64_t cover_end = (inside.back().first_index / ws + 1) * ws;
    CHECK(r.points.front().first_index <= inside.front().first_index);
    for (std::size_t i = 0; i < r.points.size(); ++i) {
      const auto& got = r.points[i];
      const std::uint64_t next = i + 1 < r.points.size() ? r.points[i + 1].first_index : cover_end;
      Agg a;
      for (const auto& p : pts)
        if (p.first_index >= got.first_index && p.first_index < next) a.add(p);
      REQUIRE(a.points > 0);
      CHECK(got.samples == a.samples);
      CHECK(got.min_v == a.min_v);
      CHECK(got.max_v == a.max_v);
      CHECK(got.mean_v == Approx(a.sum_v / double(a.samples)).epsilon(1e-9));
      CHECK(got.last_v == a.last_v);
      CHECK(got.total == a.total);
      CHECK(got.total_u == a.total_u);
      CHECK(got.utc == Approx(kT0 + double(got.first_index) * period_s));
    }
  }
  // Random windows reached the finest data and several tiers.
  CHECK(tiers_seen.count(0) == 1);
  CHECK(tiers_seen.size() >= 4);
}

TEST_CASE("rollup: a window 10 000 times longer reads as few rows (counted by SQLite) as a short one") {
  TempDir dir("rollup");
  const std::string path = dir.file("span.db");
  std::mt19937_64 rng(3);
  const double period_s = 1e-3;
  const std::uint32_t per_point = 10000;  // one series point every 10 s
  const auto pts = make_points(101'100, per_point, rng);  // about 11.7 days
  write_points(path, pts, period_s, rng, 20000);
  std::unique_ptr<Reader> reader;
  REQUIRE(Reader::open(path, reader).ok());
  const std::size_t n = 10;
  const std::uint64_t start = 1000 * per_point;
  WindowQuery short_q;
  short_q.from_index = start;
  short_q.to_index = start + 100'000 - 1;  // 100 s
  short_q.max_points = n;
  WindowQuery long_q = short_q;
  long_q.to_index = start + 100'000ull * 10'000 - 1;  // 10^6 s, 10 000 times longer
  WindowResult s, l;
  REQUIRE(reader->window(short_q, s).ok());
  REQUIRE(reader->window(long_q, l).ok());
  const auto db = open_read_only(path);
  const double points_in_long = query(*db, "SELECT count(*) FROM series_point WHERE first_index BETWEEN " +
                                               std::to_string(long_q.from_index) + " AND " +
                                               std::to_string(long_q.to_index))[0][0];
  INFO("short: tier " << s.tier_width_s << " rows " << s.rows_read << " vm steps " << s.vm_steps);
  INFO("long: tier " << l.tier_width_s << " rows " << l.rows_read << " vm steps " << l.vm_steps);
  CHECK(points_in_long == 100'000);  // what a scan of the series points would read
  CHECK(s.tier_width_s == 0);
  CHECK(l.tier_width_s == 86400);
  CHECK(s.points.size() == n);
  CHECK(l.points.size() <= n);
  // Both read about N rows: the short one N series points, the long one its
  // N-odd day buckets (a span that is not a whole number of days reads one or
  // two more than N), never anything near the 100 000 a scan would.
  CHECK(s.rows_read == n + 2);  // plus the two extent seeks
  CHECK(l.rows_read <= s.rows_read + 2);
  // No statement of either query scanned a table: every read was an index seek or range.
  CHECK(s.fullscan_steps == 0);
  CHECK(l.fullscan_steps == 0);
  CHECK(l.vm_steps <= 2 * s.vm_steps);
  // The general bound: fewer than 10 * (N + 1) rows plus the two extent seeks.
  CHECK(l.rows_read < 10 * (n + 1) + 2);
}
