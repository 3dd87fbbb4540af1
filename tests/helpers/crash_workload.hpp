#pragma once
// A deterministic stream of writer batches and the check of what a file must
// hold after any prefix of it was committed. Shared by the writer driver (a
// process the crash test kills), the crash test itself and the power-cut test.
//
// Batch k (k = 0, 1, ...) covers sample indices [k*S, (k+1)*S) of run 1,
// channel 0: one raw block of codes that depend only on (k, i), one series
// point, one closed segment (ordinal k+1) whose quantity is increment(k), a
// checkpoint whose total is the sum of increments 0..k, and every tenth batch
// an event. Every value is a small integer (or an integer over 8), so totals
// are exact in binary floating point and any lost, repeated or re-summed batch
// shows as an inequality, never as rounding.
//
// A writer that resumes takes its position and total from the stored
// checkpoint (not from this header), so the check below also checks the
// resumption: rows after a restart carry the right totals only if it was exact.
#include <unistd.h>

#include <cstdint>
#include <string>
#include <vector>

#include "storage/batch.hpp"
#include "storage/block_codec.hpp"
#include "storage/database.hpp"

namespace accrue::testing::crash {

inline constexpr std::uint16_t kSamples = 256;  // per batch
inline constexpr double kPeriod_s = 1e-3;
inline constexpr double kUtc0 = 1.8e9;

inline std::uint64_t mix(std::uint64_t x) {  // splitmix64's finaliser (Steele, Lea, Flood 2014)
  x += 0x9E3779B97F4A7C15ull;
  x = (x ^ (x >> 30)) * 0xBF58476D1CE4E5B9ull;
  x = (x ^ (x >> 27)) * 0x94D049BB133111EBull;
  return x ^ (x >> 31);
}

inline std::int32_t code(std::uint64_t index) { return std::int32_t(mix(index) % (1u << 24)) - (1 << 23); }
inline double increment(std::uint64_t k) { return double(1 + k % 13) / 8.0; }
inline double total_through(std::uint64_t k) {  // increments 0..k
  double t = 0.0;
  for (std::uint64_t j = 0; j <= k; ++j) t += increment(j);
  return t;
}
inline bool has_event(std::uint64_t k) { return k % 10 == 0; }

// Batch k, with `total_before` the stored total before it (0 for k = 0).
inline storage::Batch make_batch(std::uint64_t k, double total_before, std::int64_t calibration_id) {
  storage::Batch b;
  const std::uint64_t first = k * kSamples, last = first + kSamples - 1;
  if (k == 0) {
    storage::RunStart r;
    r.run_id = 1;
    r.board.board_serial = 11;
    r.board.sample_period_s = kPeriod_s;
    r.utc_at_index0 = kUtc0;
    r.started_unix = kUtc0;
    b.run_start = r;
  }
  storage::RawBlockRow raw;
  raw.run_id = 1;
  raw.first_index = first;
  raw.samples = kSamples;
  std::vector<std::int32_t> codes;
  for (std::uint64_t i = first; i <= last; ++i) codes.push_back(code(i));
  std::vector<std::uint8_t> scratch;
  raw.set_codes(codes, scratch);
  b.raw.push_back(std::move(raw));
  const double total = total_before + increment(k);
  storage::ChannelRows rows;
  rows.channel = 0;
  rows.run_id = 1;
  rows.calibration_id = calibration_id;
  rows.output.series.push_back(chain::SeriesPoint{first, kSamples, -1.0, 1.0, double(k % 5), double(k % 7), total, 0.0});
  chain::SegmentRecord seg;
  seg.ordinal = std::uint32_t(k + 1);
  seg.first_index = first;
  seg.last_index = last;
  seg.quantity = increment(k);
  seg.total_after = total;
  rows.output.segments.push_back(seg);
  chain::TotalSnapshot t;
  t.last_index = last;
  t.total = total;
  t.segments = std::uint32_t(k + 1);
  t.state.last_index = last;
  rows.checkpoint = t;
  b.channels.push_back(std::move(rows));
  if (has_event(k)) b.events.push_back({1, 0, first, "crash_workload_mark", "k=" + std::to_string(k), kUtc0});
  return b;
}

struct Verdict {
  std::string error;        // empty when the file is a consistent prefix
  std::int64_t batches = 0;  // batches committed (0: none yet)
  bool ok() const { return error.empty(); }
};

namespace detail {
inline bool rows(storage::Database& db, const std::string& sql, std::vector<std::vector<std::int64_t>>& out,
                 std::string& error) {
  storage::Statement st;
  if (storage::Status s = db.prepare(sql, st); !s.ok()) {
    error = s.message;
    return false;
  }
  out.clear();
  for (bool row = true;;) {
    if (storage::Status s = st.step(&row); !s.ok()) {
      error = s.message;
      return false;
    }
    if (!row) return true;
    std::vector<std::int64_t> r;
    for (int c = 0; c < sqlite3_column_count(st.raw()); ++c) r.push_back(st.column_int(c));
    out.push_back(std::move(r));
  }
}
}  // namespace detail

// Opens `path` read-only and checks that it passes PRAGMA integrity_check and
// holds exactly batches 0..K-1 for the K its checkpoint names: every raw
// block (decoded, code by code), series point, segment, event and rollup
// point once, none missing, none after. Doubles are compared exactly (see above).
inline Verdict verify(const std::string& path) {
  Verdict v;
  // Killed before the file was even created: nothing was accepted, nothing is lost.
  if (::access(path.c_str(), F_OK) != 0) return v;
  std::unique_ptr<storage::Database> db;
  if (storage::Status s = storage::Database::open(path, storage::Database::Mode::read_only, db); !s.ok())
    return {"open: " + s.message, 0};
  {
    storage::Statement st;
    bool row = false;
    if (storage::Status s = db->prepare("PRAGMA integrity_check", st); !s.ok()) return {s.message, 0};
    if (storage::Status s = st.step(&row); !s.ok()) return {s.message, 0};
    if (!row || st.column_text(0) != "ok") return {"integrity_check: " + st.column_text(0), 0};
  }
  std::vector<std::vector<std::int64_t>> r;
  std::string err;
  if (!detail::rows(*db, "SELECT count(*) FROM sqlite_schema WHERE name = 'total_checkpoint'", r, err)) return {err, 0};
  if (r[0][0] == 0) return v;  // killed before the schema was committed: an empty file is a consistent prefix
  storage::Statement cp;
  if (storage::Status s = db->prepare("SELECT last_index, total, segments FROM total_checkpoint", cp); !s.ok())
    return {s.message, 0};
  bool row = false;
  if (storage::Status s = cp.step(&row); !s.ok()) return {s.message, 0};
  std::uint64_t k_end = 0;  // batches committed
  if (row) {
    const auto last = std::uint64_t(cp.column_int(0));
    if ((last + 1) % kSamples != 0) return {"checkpoint last_index " + std::to_string(last) + " not at a batch end", 0};
    k_end = (last + 1) / kSamples;
    if (cp.column_double(1) != total_through(k_end - 1))
      return {"checkpoint total " + std::to_string(cp.column_double(1)) + " != " + std::to_string(total_through(k_end - 1)),
              0};
    if (std::uint64_t(cp.column_int(2)) != k_end) return {"checkpoint segment count", 0};
  }
  v.batches = std::int64_t(k_end);
  const auto count_is = [&](const char* sql, std::uint64_t want, const char* what) {
    if (!detail::rows(*db, sql, r, err)) return false;
    if (std::uint64_t(r[0][0]) != want) {
      err = std::string(what) + ": " + std::to_string(r[0][0]) + " rows, want " + std::to_string(want);
      return false;
    }
    return true;
  };
  if (!count_is("SELECT count(*) FROM run", k_end ? 1 : 0, "runs")) return {err, v.batches};
  std::uint64_t events = 0;
  for (std::uint64_t k = 0; k < k_end; ++k) events += has_event(k);
  if (!count_is("SELECT count(*) FROM event WHERE kind = 'crash_workload_mark'", events, "events")) return {err, v.batches};
  if (!count_is("SELECT count(DISTINCT sample_index) FROM event WHERE kind = 'crash_workload_mark'", events,
                "distinct events"))
    return {err, v.batches};
  // Rollups: every series point folded into each tier exactly once.
  if (!detail::rows(*db, "SELECT width_s, sum(points) FROM rollup GROUP BY width_s", r, err)) return {err, v.batches};
  for (const auto& w : r)
    if (std::uint64_t(w[1]) != k_end)
      return {"rollup width " + std::to_string(w[0]) + " folds " + std::to_string(w[1]) + " points, want " +
                  std::to_string(k_end),
              v.batches};
  if (k_end > 0 && r.empty()) return {"no rollups", v.batches};

  // Row by row, in index order.
  storage::Statement raw, series, seg;
  if (storage::Status s = db->prepare("SELECT first_index, samples, encoding, data FROM raw_block ORDER BY first_index", raw);
      !s.ok())
    return {s.message, v.batches};
  if (storage::Status s = db->prepare("SELECT first_index, samples, total FROM series_point ORDER BY first_index", series);
      !s.ok())
    return {s.message, v.batches};
  if (storage::Status s = db->prepare("SELECT ordinal, first_index, quantity, total_after FROM segment ORDER BY ordinal", seg);
      !s.ok())
    return {s.message, v.batches};
  std::vector<std::int32_t> codes;
  double total = 0.0;
  for (std::uint64_t k = 0;; ++k) {
    bool a = false, b = false, c = false;
    if (storage::Status s = raw.step(&a); !s.ok()) return {s.message, v.batches};
    if (storage::Status s = series.step(&b); !s.ok()) return {s.message, v.batches};
    if (storage::Status s = seg.step(&c); !s.ok()) return {s.message, v.batches};
    const std::string at = " at batch " + std::to_string(k);
    if (k == k_end) {
      if (a || b || c) return {"rows after the checkpoint" + at, v.batches};
      break;
    }
    if (!a || !b || !c) return {"rows missing" + at, v.batches};
    total += increment(k);
    if (std::uint64_t(raw.column_int(0)) != k * kSamples || raw.column_int(1) != kSamples)
      return {"raw block out of order or duplicated" + at, v.batches};
    const auto* p = static_cast<const std::uint8_t*>(sqlite3_column_blob(raw.raw(), 3));
    const std::span<const std::uint8_t> data(p, std::size_t(sqlite3_column_bytes(raw.raw(), 3)));
    if (storage::Status s = storage::block_codec::decode(int(raw.column_int(2)), data, 1, kSamples, codes); !s.ok())
      return {"raw block" + at + ": " + s.message, v.batches};
    for (std::uint64_t i = 0; i < kSamples; ++i)
      if (codes[i] != code(k * kSamples + i)) return {"raw code differs" + at, v.batches};
    if (std::uint64_t(series.column_int(0)) != k * kSamples || series.column_double(2) != total)
      return {"series point out of order, duplicated or with a wrong total" + at, v.batches};
    if (std::uint64_t(seg.column_int(0)) != k + 1 || std::uint64_t(seg.column_int(1)) != k * kSamples ||
        seg.column_double(2) != increment(k) || seg.column_double(3) != total)
      return {"segment out of order, duplicated or with a wrong total" + at, v.batches};
  }
  return v;
}

}  // namespace accrue::testing::crash
