// StoreQueries' window buckets finer than the series points, from the raw
// blocks. The volts of each bucket come from the ADC codes through the
// calibration the derivation's series points name (so they equal what the
// chain saw). The store keeps no total finer than a series point, so a
// bucket's total is interpolated linearly in sample index between the
// series points' totals (each is the running total at its point's last
// sample); the reply says so.
#include <algorithm>
#include <span>
#include <vector>

#include "daemon/api/store_queries.hpp"
#include "daemon/api/store_sql.hpp"
#include "storage/block_codec.hpp"
#include "storage/calibration_json.hpp"

namespace accrue::daemon::api {

using storage::Statement;
using storage::Status;

namespace {

struct BlockSpan {
  std::uint64_t first_index = 0, samples = 0;
};

// The last raw block starting at or before `index` (one index seek).
Status last_block_at_or_before(storage::Database& db, std::int64_t run_id, std::uint64_t index,
                               std::optional<BlockSpan>& out) {
  out.reset();
  Statement st;
  if (Status s = db.prepare("SELECT first_index, samples FROM raw_block WHERE run_id = ? AND first_index <= ?"
                            " ORDER BY first_index DESC LIMIT 1",
                            st);
      !s.ok())
    return s;
  st.bind(1, run_id).bind(2, clamp64(index));
  bool row = false;
  if (Status s = st.step(&row); !s.ok()) return s;
  if (row) out = BlockSpan{std::uint64_t(st.column_int(0)), std::uint64_t(std::max<std::int64_t>(1, st.column_int(1)))};
  return Status::success();
}

// `index` when a block holds it, else the first sample of the first block after it (up to to_index).
Status block_at_or_after(storage::Database& db, std::int64_t run_id, std::uint64_t index, std::uint64_t to_index,
                         std::optional<std::uint64_t>& first_sample) {
  std::optional<BlockSpan> at;
  if (Status s = last_block_at_or_before(db, run_id, index, at); !s.ok()) return s;
  if (at && at->first_index + at->samples > index) {
    first_sample = index;
    return Status::success();
  }
  Statement next;
  if (Status s = db.prepare("SELECT first_index FROM raw_block WHERE run_id = ? AND first_index > ? AND first_index <= ?"
                            " ORDER BY first_index LIMIT 1",
                            next);
      !s.ok())
    return s;
  next.bind(1, run_id).bind(2, clamp64(index)).bind(3, clamp64(to_index));
  bool row = false;
  if (Status s = next.step(&row); !s.ok()) return s;
  if (row) first_sample = std::uint64_t(next.column_int(0));
  return Status::success();
}

struct TotalAt {
  std::uint64_t index;  // the series point's last sample
  double total, total_u;
};

// Linear in sample index between the neighbouring series totals; held flat beyond the first and last.
std::pair<double, double> interpolate(const std::vector<TotalAt>& totals, std::uint64_t index) {
  if (totals.empty()) return {0.0, 0.0};
  const auto after = std::lower_bound(totals.begin(), totals.end(), index,
                                      [](const TotalAt& t, std::uint64_t i) { return t.index < i; });
  if (after == totals.begin()) return {after->total, after->total_u};
  if (after == totals.end()) return {totals.back().total, totals.back().total_u};
  const TotalAt& a = *(after - 1);
  const TotalAt& b = *after;
  const double f = double(index - a.index) / double(b.index - a.index);
  return {a.total + f * (b.total - a.total), a.total_u + f * (b.total_u - a.total_u)};
}

}  // namespace

Status StoreQueries::raw_extent(std::int64_t run_id, std::uint64_t from_index, std::uint64_t to_index,
                               std::optional<std::pair<std::uint64_t, std::uint64_t>>& out) {
  out.reset();
  std::optional<std::uint64_t> lo;
  if (Status s = block_at_or_after(*db_, run_id, from_index, to_index, lo); !s.ok()) return s;
  if (!lo) return Status::success();
  std::optional<BlockSpan> last_block;
  if (Status s = last_block_at_or_before(*db_, run_id, to_index, last_block); !s.ok()) return s;
  if (!last_block) return Status::success();
  const std::uint64_t last = last_block->first_index + last_block->samples - 1;
  const std::uint64_t hi = std::min(to_index, last);
  if (hi >= *lo) out = std::make_pair(*lo, hi);
  return Status::success();
}

Status StoreQueries::raw_page(std::int64_t run_id, int channel, std::uint64_t stride, std::uint64_t first_bucket,
                              std::uint64_t last_bucket, WindowPage& out, std::optional<int> derivation) {
  const std::uint64_t B = out.bucket_samples;
  const std::uint64_t begin = std::max(out.lo, first_bucket * B);
  const std::uint64_t end = std::min(out.hi, last_bucket * B + (B - 1));

  // The series totals around the page (one point either side), and the calibration they were made with.
  std::vector<TotalAt> totals;
  std::int64_t calibration_id = -1;
  {
    Statement st;
    if (Status s = db_->prepare(
            "SELECT first_index, samples, total, total_u, calibration_id FROM series_point"
            " WHERE run_id = ?1 AND channel = ?2 AND first_index BETWEEN ?3 AND ?4"
            " AND derivation = " ACCRUE_READ_DERIVATION " ORDER BY first_index",
            st);
        !s.ok())
      return s;
    st.bind(1, run_id).bind(2, std::int64_t(channel));
    st.bind(3, clamp64(begin >= 2 * stride ? begin - 2 * stride : 0)).bind(4, clamp64(end + stride));
    bind_derivation(st, derivation);
    for (bool row = true;;) {
      if (Status s = st.step(&row); !s.ok()) return s;
      if (!row) break;
      const std::uint64_t first = std::uint64_t(st.column_int(0));
      const std::uint64_t n = std::uint64_t(std::max<std::int64_t>(1, st.column_int(1)));
      totals.push_back({first + n - 1, st.column_double(2), st.column_double(3)});
      if (calibration_id < 0 || first <= begin) calibration_id = st.column_int(4);
    }
  }
  if (calibration_id < 0) return Status::success();  // no series for this channel here: nothing to convert with
  std::int32_t zero_code = 0;
  double volts_per_code = 0.0;  // once per page, not per sample
  {
    Statement ct;
    if (Status s = db_->prepare("SELECT quantity, unit, definition FROM calibration WHERE calibration_id = ?", ct);
        !s.ok())
      return s;
    ct.bind(1, calibration_id);
    bool row = false;
    if (Status s = ct.step(&row); !s.ok()) return s;
    if (!row) return Status::error(SQLITE_CORRUPT, "calibration " + std::to_string(calibration_id) + " is missing");
    out.quantity = ct.column_text(0);
    out.unit = ct.column_text(1);
    const auto cal = storage::calibration_from_definition(ct.column_text(2));
    if (!cal) return Status::error(SQLITE_CORRUPT, "calibration " + std::to_string(calibration_id) + " is unreadable");
    zero_code = cal->adc.zero_code;
    volts_per_code = cal->adc.volts_per_code();
  }

  // The blocks from the one holding `begin` to `end`, decoded one at a time.
  std::optional<BlockSpan> at_begin;
  if (Status s = last_block_at_or_before(*db_, run_id, begin, at_begin); !s.ok()) return s;
  const std::uint64_t from_block = at_begin ? at_begin->first_index : begin;
  Statement st;
  if (Status s = db_->prepare("SELECT first_index, channel_count, samples, encoding, data FROM raw_block"
                              " WHERE run_id = ? AND first_index BETWEEN ? AND ? ORDER BY first_index",
                              st);
      !s.ok())
    return s;
  st.bind(1, run_id).bind(2, clamp64(from_block)).bind(3, clamp64(end));
  std::vector<std::int32_t> codes;
  out.buckets.reserve(std::size_t(std::min<std::uint64_t>(last_bucket - first_bucket + 1, 1u << 16)));
  double sum_v = 0.0;
  std::uint64_t last_in_bucket = 0;
  double before = interpolate(totals, begin > 0 ? begin - 1 : 0).first;
  auto close_bucket = [&] {
    if (out.buckets.empty()) return;
    Bucket& b = out.buckets.back();
    b.mean_v = sum_v / double(b.samples);
    const auto [total, total_u] = interpolate(totals, last_in_bucket);
    b.total = total;
    b.total_u = total_u;
    b.delta = total - before;
    before = total;
  };
  for (bool row = true;;) {
    if (Status s = st.step(&row); !s.ok()) return s;
    if (!row) break;
    const std::uint64_t first = std::uint64_t(st.column_int(0));
    const int channels = int(st.column_int(1));
    const std::size_t samples = std::size_t(st.column_int(2));
    if (channel >= channels) continue;
    const auto* data = static_cast<const std::uint8_t*>(sqlite3_column_blob(st.raw(), 4));
    const std::size_t size = std::size_t(sqlite3_column_bytes(st.raw(), 4));
    if (Status s = storage::block_codec::decode(int(st.column_int(3)), std::span<const std::uint8_t>(data, size),
                                                channels, std::size_t(channels) * samples, codes);
        !s.ok())
      return Status::error(s.code, "raw block at " + std::to_string(first) + ": " + s.message);
    const std::uint64_t k0 = begin > first ? begin - first : 0;
    const std::uint64_t k1 = std::min<std::uint64_t>(samples, end - first + 1);
    for (std::uint64_t k = k0; k < k1; ++k) {
      const std::uint64_t index = first + k;
      const std::int32_t code = codes[std::size_t(k) * std::size_t(channels) + std::size_t(channel)];
      const double v = double(code - zero_code) * volts_per_code;  // AdcCalibration::to_volts
      const std::uint64_t bucket_first = index / B * B;
      if (out.buckets.empty() || out.buckets.back().first_index != bucket_first) {
        close_bucket();
        Bucket b;
        b.first_index = bucket_first;
        b.min_v = b.max_v = v;
        out.buckets.push_back(b);
        sum_v = 0.0;
      }
      Bucket& b = out.buckets.back();
      ++b.samples;
      b.min_v = std::min(b.min_v, v);
      b.max_v = std::max(b.max_v, v);
      sum_v += v;
      b.last_v = v;
      last_in_bucket = index;
    }
  }
  close_bucket();
  return Status::success();
}

}  // namespace accrue::daemon::api
