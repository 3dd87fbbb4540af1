#include "daemon/api/store_queries.hpp"

#include <algorithm>
#include <climits>
#include <functional>

#include "daemon/api/store_sql.hpp"
#include "storage/rollup.hpp"

namespace accrue::daemon::api {

using storage::Statement;
using storage::Status;

namespace {
Status each_row(Statement& st, const std::function<void(const Statement&)>& f) {
  for (bool row = true;;) {
    if (Status s = st.step(&row); !s.ok()) return s;
    if (!row) return Status::success();
    f(st);
  }
}
}  // namespace

Status StoreQueries::open(const std::string& path, std::unique_ptr<StoreQueries>& out) {
  std::unique_ptr<storage::Database> db;
  if (Status s = storage::Database::open(path, storage::Database::Mode::read_only, db); !s.ok()) return s;
  out.reset(new StoreQueries(std::move(db)));
  return Status::success();
}

namespace {
// One index seek: the first (or last) series point of the channel in [from, to].
Status seek_point(storage::Database& db, const char* sql, std::int64_t run_id, int channel, std::uint64_t from_index,
                  std::uint64_t to_index, std::optional<std::uint64_t>& index, std::uint64_t& samples,
                  std::optional<int> derivation) {
  Statement st;
  if (Status s = db.prepare(sql, st); !s.ok()) return s;
  st.bind(1, run_id).bind(2, std::int64_t(channel)).bind(3, clamp64(from_index)).bind(4, clamp64(to_index));
  bind_derivation(st, derivation);
  bool row = false;
  if (Status s = st.step(&row); !s.ok()) return s;
  if (row) index = std::uint64_t(st.column_int(0)), samples = std::uint64_t(st.column_int(1));
  return Status::success();
}

// The number of samples per bucket for a window of [lo, hi] in at most
// max_points buckets: span / max_points rounded up, or span / (max_points - 1)
// rounded up when the first lets max_points + 1 buckets overlap (buckets are
// aligned to multiples of their size); never finer than the series points.
std::uint64_t bucket_for(std::uint64_t lo, std::uint64_t hi, std::size_t max_points, std::uint64_t stride) {
  const std::uint64_t span = hi - lo + 1;
  const std::uint64_t n = std::max<std::size_t>(1, max_points);
  auto overlapping = [&](std::uint64_t b) { return hi / b - lo / b + 1; };
  std::uint64_t b = std::max<std::uint64_t>(stride, (span + n - 1) / n);
  if (overlapping(b) > n) b = std::max<std::uint64_t>(stride, n > 1 ? (span + n - 2) / (n - 1) : hi + 1);
  return b;
}

// Rollup widths (in samples) a window of `bucket_samples` may read, coarsest
// first: every tier no wider than the bucket and wider than the series points
// (whose multiples they are).
std::vector<std::pair<std::int64_t, std::uint64_t>> tiers_for(std::uint64_t bucket_samples, std::uint64_t stride,
                                                              double sample_period_s) {
  std::vector<std::pair<std::int64_t, std::uint64_t>> out;
  for (auto it = storage::rollup::kWidthsS.rbegin(); it != storage::rollup::kWidthsS.rend(); ++it) {
    const std::uint64_t w = storage::rollup::width_samples(*it, sample_period_s);
    if (w <= bucket_samples && w > stride && w % stride == 0) out.emplace_back(*it, w);
  }
  return out;
}
}  // namespace

Status StoreQueries::window_page(std::int64_t run_id, int channel, std::uint64_t from_index, std::uint64_t to_index,
                                 std::size_t max_points, std::size_t page_points, std::uint64_t bucket_samples,
                                 std::optional<std::uint64_t> start, WindowPage& out,
                                 std::optional<int> derivation) {
  out = WindowPage{};
  double period_s = 0.0;
  {
    Statement st;
    if (Status s = db_->prepare("SELECT sample_period_s FROM run WHERE run_id = ?", st); !s.ok()) return s;
    st.bind(1, run_id);
    bool row = false;
    if (Status s = st.step(&row); !s.ok()) return s;
    if (!row) return Status::error(SQLITE_NOTFOUND, "no such run");
    period_s = st.column_double(0);
  }
  // The data's extent by two index seeks, so the cost never depends on the span.
  std::optional<std::uint64_t> lo, hi;
  std::uint64_t stride = 1, last_samples = 1;
  if (Status s = seek_point(*db_,
                            "SELECT first_index, samples FROM series_point WHERE run_id = ?1 AND channel = ?2"
                            " AND first_index BETWEEN ?3 AND ?4 AND derivation = " ACCRUE_READ_DERIVATION
                            " ORDER BY first_index LIMIT 1",
                            run_id, channel, from_index, to_index, lo, stride, derivation);
      !s.ok())
    return s;
  if (Status s = seek_point(*db_,
                            "SELECT first_index, samples FROM series_point WHERE run_id = ?1 AND channel = ?2"
                            " AND first_index BETWEEN ?3 AND ?4 AND derivation = " ACCRUE_READ_DERIVATION
                            " ORDER BY first_index DESC LIMIT 1",
                            run_id, channel, from_index, to_index, hi, last_samples, derivation);
      !s.ok())
    return s;
  if (!lo || !hi) return Status::success();
  out.empty = false;
  out.lo = *lo;
  out.hi = *hi;
  stride = std::max<std::uint64_t>(1, stride);
  // Finer than the series points: from the raw blocks while they are kept.
  // A continuation's bucket size says which the first page chose.
  if (stride > 1 && (bucket_samples == 0 || bucket_samples < stride)) {
    std::optional<std::pair<std::uint64_t, std::uint64_t>> extent;
    if (Status s = raw_extent(run_id, from_index, to_index, extent); !s.ok()) return s;
    if (extent) {
      const std::uint64_t B = bucket_samples > 0 ? bucket_samples : bucket_for(extent->first, extent->second, max_points, 1);
      if (B < stride) {
        out.lo = extent->first;
        out.hi = extent->second;
        out.bucket_samples = B;
        out.from_raw = true;
        const std::uint64_t first_bucket = std::max(out.lo, start.value_or(out.lo)) / B;
        const std::uint64_t last_bucket = std::min(out.hi / B, first_bucket + page_points - 1);
        if (last_bucket < out.hi / B) out.next_start = (last_bucket + 1) * B;
        return raw_page(run_id, channel, stride, first_bucket, last_bucket, out, derivation);
      }
    }
  }
  out.bucket_samples = bucket_samples > 0 ? bucket_samples : bucket_for(out.lo, out.hi, max_points, stride);
  const std::uint64_t B = out.bucket_samples;
  const std::uint64_t first_bucket = std::max(out.lo, start.value_or(out.lo)) / B;
  const std::uint64_t last_bucket = std::min(out.hi / B, first_bucket + page_points - 1);
  if (last_bucket < out.hi / B) out.next_start = (last_bucket + 1) * B;
  const std::uint64_t page_begin = first_bucket * B;
  const std::uint64_t page_end = last_bucket * B + (B - 1);

  // The coarsest tier no wider than a bucket that has rows in the page (a
  // store written before a width existed lacks it: one index seek each);
  // else the series points. A bucket holds the rows that start in it.
  std::int64_t width_s = 0;
  std::uint64_t tier = 0;
  for (const auto& [w_s, w] : tiers_for(B, stride, period_s)) {
    Statement probe;
    if (Status s = db_->prepare("SELECT 1 FROM rollup WHERE run_id = ?1 AND channel = ?2 AND width_s = ?3"
                                " AND bucket BETWEEN ?4 AND ?5 AND derivation = " ACCRUE_READ_DERIVATION " LIMIT 1",
                                probe);
        !s.ok())
      return s;
    probe.bind(1, run_id).bind(2, std::int64_t(channel)).bind(3, w_s);
    probe.bind(4, clamp64(page_begin / w)).bind(5, clamp64(page_end / w));
    bind_derivation(probe, derivation);
    bool row = false;
    if (Status s = probe.step(&row); !s.ok()) return s;
    if (row) {
      width_s = w_s, tier = w;
      break;
    }
  }

  Statement st;
  if (tier > 0) {
    if (Status s = db_->prepare(
            "SELECT first_index, samples, min_v, max_v, sum_v, last_v, total, total_u, calibration_id FROM rollup"
            " WHERE run_id = ?1 AND channel = ?2 AND width_s = ?3 AND bucket BETWEEN ?4 AND ?5"
            " AND first_index BETWEEN ?6 AND ?7 AND derivation = " ACCRUE_READ_DERIVATION " ORDER BY bucket",
            st);
        !s.ok())
      return s;
    st.bind(1, run_id).bind(2, std::int64_t(channel)).bind(3, width_s);
    st.bind(4, clamp64(page_begin / tier)).bind(5, clamp64(page_end / tier));
    st.bind(6, clamp64(page_begin)).bind(7, clamp64(page_end));
  } else {
    if (Status s = db_->prepare(
            "SELECT first_index, samples, min_v, max_v, mean_v * samples, last_v, total, total_u, calibration_id"
            " FROM series_point WHERE run_id = ?1 AND channel = ?2 AND first_index BETWEEN ?6 AND ?7"
            " AND derivation = " ACCRUE_READ_DERIVATION " ORDER BY first_index",
            st);
        !s.ok())
      return s;
    st.bind(1, run_id).bind(2, std::int64_t(channel)).bind(6, clamp64(page_begin)).bind(7, clamp64(page_end));
  }
  bind_derivation(st, derivation);
  out.buckets.reserve(std::min<std::uint64_t>(last_bucket - first_bucket + 1, 1u << 16));

  // The total just before the page's first row, so the first bucket's
  // increase is right: one index seek, made when that row is known.
  double before = 0.0;
  bool have_before = false;
  std::int64_t calibration_id = -1;
  auto total_before = [&](std::uint64_t index) -> Status {
    Statement bt;
    if (Status s = db_->prepare(
            "SELECT total FROM series_point WHERE run_id = ?1 AND channel = ?2 AND first_index < ?3"
            " AND derivation = " ACCRUE_READ_DERIVATION " ORDER BY first_index DESC LIMIT 1",
            bt);
        !s.ok())
      return s;
    bt.bind(1, run_id).bind(2, std::int64_t(channel)).bind(3, clamp64(index));
    bind_derivation(bt, derivation);
    bool row = false;
    if (Status s = bt.step(&row); !s.ok()) return s;
    if (row) {
      before = bt.column_double(0), have_before = true;
      return Status::success();
    }
    // The run's first point counts from itself (a tier row holds only its last point's total).
    Statement ft;
    if (Status s = db_->prepare("SELECT total FROM series_point WHERE run_id = ?1 AND channel = ?2 AND first_index = ?3"
                                " AND derivation = " ACCRUE_READ_DERIVATION,
                                ft);
        !s.ok())
      return s;
    ft.bind(1, run_id).bind(2, std::int64_t(channel)).bind(3, clamp64(index));
    bind_derivation(ft, derivation);
    if (Status s = ft.step(&row); !s.ok()) return s;
    if (row) before = ft.column_double(0), have_before = true;
    return Status::success();
  };
  double sum_v = 0.0;
  std::uint64_t current = UINT64_MAX;
  auto close_bucket = [&] {
    if (out.buckets.empty()) return;
    Bucket& b = out.buckets.back();
    b.mean_v = sum_v / double(std::max<std::uint64_t>(1, b.samples));
    b.delta = b.total - before;
    before = b.total;
  };
  for (bool first = true;; first = false) {
    bool row = false;
    if (Status s = st.step(&row); !s.ok()) return s;
    if (!row) break;
    const std::uint64_t index = std::uint64_t(st.column_int(0));
    if (first) {
      if (Status s = total_before(index); !s.ok()) return s;
      calibration_id = st.column_int(8);
    }
    const std::uint64_t bucket = index / B;
    const double min_v = st.column_double(2), max_v = st.column_double(3);
    if (bucket != current) {
      close_bucket();
      current = bucket;
      Bucket b;
      b.first_index = bucket * B;
      b.min_v = min_v;
      b.max_v = max_v;
      out.buckets.push_back(b);
      sum_v = 0.0;
    }
    Bucket& b = out.buckets.back();
    b.samples += std::uint64_t(st.column_int(1));
    b.min_v = std::min(b.min_v, min_v);
    b.max_v = std::max(b.max_v, max_v);
    sum_v += st.column_double(4);
    b.last_v = st.column_double(5);
    b.total = st.column_double(6);
    b.total_u = st.column_double(7);
  }
  close_bucket();
  // The quantity and unit of the page's first row's calibration (one lookup, not a join per row).
  if (calibration_id >= 0) {
    Statement ct;
    if (Status s = db_->prepare("SELECT quantity, unit FROM calibration WHERE calibration_id = ?", ct); !s.ok())
      return s;
    ct.bind(1, calibration_id);
    bool row = false;
    if (Status s = ct.step(&row); !s.ok()) return s;
    if (row) out.quantity = ct.column_text(0), out.unit = ct.column_text(1);
  }
  return Status::success();
}

Status StoreQueries::segments(std::int64_t run_id, int channel, std::uint64_t from_index, std::uint64_t to_index,
                              std::int64_t after_ordinal, std::size_t limit, std::vector<SegmentRow>& out,
                              std::optional<int> derivation) {
  out.clear();
  Statement st;
  if (Status s = db_->prepare(
          "SELECT ordinal, first_index, last_index, start_v, end_v, drift_v, gap_before_v, gap_before_u_v,"
          " end_points_u_v, quantity, baseline_ordinal, flags, total_after, total_u_after, calibration_id FROM segment"
          " WHERE run_id = ?1 AND channel = ?2 AND last_index >= ?3 AND first_index <= ?4 AND ordinal > ?5"
          " AND derivation = " ACCRUE_READ_DERIVATION " ORDER BY ordinal LIMIT ?6",
          st);
      !s.ok())
    return s;
  st.bind(1, run_id).bind(2, std::int64_t(channel)).bind(3, clamp64(from_index)).bind(4, clamp64(to_index));
  st.bind(5, after_ordinal).bind(6, std::int64_t(limit));
  bind_derivation(st, derivation);
  return each_row(st, [&](const Statement& r) {
    SegmentRow s;
    s.ordinal = r.column_int(0);
    s.first_index = std::uint64_t(r.column_int(1));
    s.last_index = std::uint64_t(r.column_int(2));
    s.start_v = r.column_double(3);
    s.end_v = r.column_double(4);
    s.drift_v = r.column_double(5);
    s.gap_before_v = r.column_double(6);
    s.gap_before_u_v = r.column_double(7);
    s.end_points_u_v = r.column_double(8);
    s.quantity = r.column_double(9);
    s.baseline_ordinal = r.column_int(10);
    s.flags = r.column_int(11);
    s.total_after = r.column_double(12);
    s.total_u_after = r.column_double(13);
    s.calibration_id = r.column_int(14);
    out.push_back(s);
  });
}

Status StoreQueries::events(const EventFilter& f, std::vector<EventOut>& out) {
  out.clear();
  std::string sql =
      "SELECT event_id, run_id, channel, sample_index, kind, detail, host_utc FROM event WHERE event_id > ?";
  if (f.run_id) sql += " AND run_id = ?";
  if (f.channel) sql += " AND (channel = ? OR channel IS NULL)";
  if (f.from_utc) sql += " AND host_utc >= ?";
  if (f.to_utc) sql += " AND host_utc <= ?";
  if (f.from_index) sql += " AND sample_index >= ?";
  if (f.to_index) sql += " AND sample_index <= ?";
  if (!f.kinds.empty()) {
    sql += " AND kind IN (";
    for (std::size_t i = 0; i < f.kinds.size(); ++i) sql += i ? ",?" : "?";
    sql += ")";
  }
  sql += " ORDER BY event_id LIMIT ?";
  Statement st;
  if (Status s = db_->prepare(sql, st); !s.ok()) return s;
  int at = 1;
  st.bind(at++, f.after_id);
  if (f.run_id) st.bind(at++, *f.run_id);
  if (f.channel) st.bind(at++, std::int64_t(*f.channel));
  if (f.from_utc) st.bind(at++, std::string_view(*f.from_utc));
  if (f.to_utc) st.bind(at++, std::string_view(*f.to_utc));
  if (f.from_index) st.bind(at++, clamp64(*f.from_index));
  if (f.to_index) st.bind(at++, clamp64(*f.to_index));
  for (const auto& k : f.kinds) st.bind(at++, std::string_view(k));
  st.bind(at++, std::int64_t(f.limit));
  return each_row(st, [&](const Statement& r) {
    EventOut e;
    e.event_id = r.column_int(0);
    if (!r.column_is_null(1)) e.run_id = r.column_int(1);
    if (!r.column_is_null(2)) e.channel = int(r.column_int(2));
    if (!r.column_is_null(3)) e.sample_index = std::uint64_t(r.column_int(3));
    e.kind = r.column_text(4);
    e.detail = r.column_text(5);
    e.host_utc = r.column_text(6);
    out.push_back(std::move(e));
  });
}

Status StoreQueries::calibrations(std::optional<int> channel, std::vector<CalibrationRow>& out) {
  out.clear();
  Statement st;
  if (Status s = db_->prepare(
          "SELECT calibration_id, channel, created_utc, quantity, unit, quantity_per_volt, definition FROM calibration"
          " WHERE ? < 0 OR channel = ? ORDER BY channel, calibration_id",
          st);
      !s.ok())
    return s;
  st.bind(1, std::int64_t(channel.value_or(-1))).bind(2, std::int64_t(channel.value_or(-1)));
  return each_row(st, [&](const Statement& r) {
    CalibrationRow c;
    c.calibration_id = r.column_int(0);
    c.channel = int(r.column_int(1));
    c.created_utc = r.column_text(2);
    c.quantity = r.column_text(3);
    c.unit = r.column_text(4);
    c.quantity_per_volt = r.column_double(5);
    c.definition = r.column_text(6);
    out.push_back(std::move(c));
  });
}

}  // namespace accrue::daemon::api
