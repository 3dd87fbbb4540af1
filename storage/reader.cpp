#include "storage/reader.hpp"

#include <algorithm>

#include "storage/block_codec.hpp"
#include "storage/chain_state_json.hpp"
#include "storage/rollup.hpp"

namespace accrue::storage {
namespace {

constexpr const char* kRunColumns =
    "SELECT r.run_id, b.serial, r.sample_period_s, r.utc_at_index0, r.started_utc, COALESCE(r.ended_utc, ''),"
    " COALESCE(r.end_reason, '') FROM run r JOIN board b USING (board_id)";

RunInfo run_from(const Statement& st) {
  RunInfo r;
  r.run_id = st.column_int(0);
  r.board_serial = st.column_int(1);
  r.sample_period_s = st.column_double(2);
  r.utc_at_index0 = st.column_double(3);
  r.started_utc = st.column_text(4);
  r.ended_utc = st.column_text(5);
  r.end_reason = st.column_text(6);
  return r;
}

}  // namespace

Status Reader::open(const std::string& path, std::unique_ptr<Reader>& out) {
  std::unique_ptr<Database> db;
  if (Status s = Database::open(path, Database::Mode::read_only, db); !s.ok()) return s;
  out.reset(new Reader(std::move(db)));
  return Status::success();
}

Status Reader::runs(std::vector<RunInfo>& out) {
  out.clear();
  Statement st;
  if (Status s = db_->prepare(std::string(kRunColumns) + " ORDER BY r.run_id", st); !s.ok()) return s;
  for (bool row = true;;) {
    if (Status s = st.step(&row); !s.ok()) return s;
    if (!row) break;
    out.push_back(run_from(st));
  }
  return Status::success();
}

Status Reader::run_by_id(std::int64_t run_id, std::optional<RunInfo>& out) {
  out.reset();
  Statement st;
  if (Status s = db_->prepare(std::string(kRunColumns) + " WHERE r.run_id = ?", st); !s.ok()) return s;
  st.bind(1, run_id);
  bool row = false;
  if (Status s = st.step(&row); !s.ok()) return s;
  if (row) out = run_from(st);
  return Status::success();
}

Status Reader::latest_run(std::optional<RunInfo>& out) {
  out.reset();
  Statement st;
  if (Status s = db_->prepare(std::string(kRunColumns) + " ORDER BY r.run_id DESC LIMIT 1", st); !s.ok()) return s;
  bool row = false;
  if (Status s = st.step(&row); !s.ok()) return s;
  if (row) out = run_from(st);
  return Status::success();
}

Status Reader::checkpoints(std::vector<CheckpointRow>& out) {
  out.clear();
  Statement st;
  if (Status s = db_->prepare(
          "SELECT t.channel, t.run_id, t.last_index, t.total, t.std_uncertainty, t.segments, t.flags, t.calibration_id,"
          " c.quantity, c.unit, t.committed_utc, t.state, c.quantity_per_volt FROM total_checkpoint t JOIN calibration c USING (calibration_id)"
          " ORDER BY t.channel",
          st);
      !s.ok())
    return s;
  for (bool row = true;;) {
    if (Status s = st.step(&row); !s.ok()) return s;
    if (!row) break;
    CheckpointRow c;
    c.channel = int(st.column_int(0));
    c.run_id = st.column_int(1);
    c.last_index = std::uint64_t(st.column_int(2));
    c.total = st.column_double(3);
    c.std_uncertainty = st.column_double(4);
    c.segments = std::uint32_t(st.column_int(5));
    c.flags = std::uint32_t(st.column_int(6));
    c.calibration_id = st.column_int(7);
    c.quantity = st.column_text(8);
    c.unit = st.column_text(9);
    c.committed_utc = st.column_text(10);
    c.quantity_per_volt = st.column_double(12);
    auto state = chain_state_from_json(st.column_text(11));
    if (!state) return Status::error(SQLITE_CORRUPT, "total_checkpoint.state of channel " + std::to_string(c.channel) +
                                                         " is not a valid chain state");
    c.state = *state;
    out.push_back(c);
  }
  return Status::success();
}

namespace {

std::int64_t clamp_index(std::uint64_t v) { return std::int64_t(std::min<std::uint64_t>(v, INT64_MAX)); }

void add_cost(const Statement& st, WindowResult& out) {
  out.vm_steps += std::uint64_t(sqlite3_stmt_status(st.raw(), SQLITE_STMTSTATUS_VM_STEP, 0));
  out.fullscan_steps += std::uint64_t(sqlite3_stmt_status(st.raw(), SQLITE_STMTSTATUS_FULLSCAN_STEP, 0));
}

// One index found with a single index seek (ORDER BY ... LIMIT 1).
Status seek_index(Database& db, const char* sql, std::int64_t run_id, int channel, std::int64_t bound,
                  std::optional<std::uint64_t>& found, std::optional<std::uint64_t>& samples, WindowResult& cost) {
  // ?4 is the derivation read (cost.derivation, set by window()).
  found.reset();
  Statement st;
  if (Status s = db.prepare(sql, st); !s.ok()) return s;
  st.bind(1, run_id).bind(2, std::int64_t(channel)).bind(3, bound).bind(4, std::int64_t(cost.derivation));
  bool row = false;
  if (Status s = st.step(&row); !s.ok()) return s;
  if (row) {
    found = std::uint64_t(st.column_int(0));
    samples = std::uint64_t(st.column_int(1));
    ++cost.rows_read;
  }
  add_cost(st, cost);
  return Status::success();
}

}  // namespace

Status Reader::window(const WindowQuery& q, WindowResult& out) {
  out = WindowResult{};
  std::optional<RunInfo> run;
  if (Status s = q.run_id ? run_by_id(*q.run_id, run) : latest_run(run); !s.ok()) return s;
  if (!run) return Status::error(SQLITE_NOTFOUND, q.run_id ? "no such run" : "no runs recorded yet");
  out.run = *run;
  if (Status s = resolve_derivation(run->run_id, q.derivation, out.derivation); !s.ok()) return s;
  // The window's real extent, by index seeks (cost independent of the span).
  std::optional<std::uint64_t> lo, hi, point_samples, ignored;
  if (Status s = seek_index(*db_,
                            "SELECT first_index, samples FROM series_point WHERE run_id = ?1 AND derivation = ?4 AND"
                            " channel = ?2 AND first_index >= ?3 ORDER BY first_index LIMIT 1",
                            run->run_id, q.channel, clamp_index(q.from_index), lo, point_samples, out);
      !s.ok())
    return s;
  if (Status s = seek_index(*db_,
                            "SELECT first_index, samples FROM series_point WHERE run_id = ?1 AND derivation = ?4 AND"
                            " channel = ?2 AND first_index <= ?3 ORDER BY first_index DESC LIMIT 1",
                            run->run_id, q.channel, clamp_index(q.to_index), hi, ignored, out);
      !s.ok())
    return s;
  if (!lo || !hi || *hi < *lo) return Status::success();  // nothing in the window
  const double series_interval_s = double(point_samples.value_or(1)) * run->sample_period_s;
  const auto width = rollup::choose_tier(*lo, *hi, q.max_points, run->sample_period_s, series_interval_s);
  Statement st;
  if (width) {
    out.tier_width_s = *width;
    const std::uint64_t w = rollup::width_samples(*width, run->sample_period_s);
    if (Status s = db_->prepare(
            "SELECT o.first_index, o.samples, o.min_v, o.max_v, o.sum_v / o.samples, o.last_v, o.total, o.total_u,"
            " c.quantity, c.unit FROM rollup o JOIN calibration c USING (calibration_id)"
            " WHERE o.run_id = ?1 AND o.derivation = ?6 AND o.channel = ?2 AND o.width_s = ?3 AND o.bucket BETWEEN ?4 AND ?5"
            " ORDER BY o.bucket",
            st);
        !s.ok())
      return s;
    st.bind(1, run->run_id).bind(2, std::int64_t(q.channel)).bind(3, *width);
    st.bind(4, clamp_index(*lo / w)).bind(5, clamp_index(*hi / w)).bind(6, std::int64_t(out.derivation));
  } else {
    if (Status s = db_->prepare(
            "SELECT p.first_index, p.samples, p.min_v, p.max_v, p.mean_v, p.last_v, p.total, p.total_u, c.quantity, c.unit"
            " FROM series_point p JOIN calibration c USING (calibration_id)"
            " WHERE p.run_id = ?1 AND p.derivation = ?5 AND p.channel = ?2 AND p.first_index BETWEEN ?3 AND ?4"
            " ORDER BY p.first_index",
            st);
        !s.ok())
      return s;
    st.bind(1, run->run_id).bind(2, std::int64_t(q.channel)).bind(3, std::int64_t(*lo)).bind(4, std::int64_t(*hi));
    st.bind(5, std::int64_t(out.derivation));
  }
  std::vector<WindowPoint> rows;
  for (bool row = true;;) {
    if (Status s = st.step(&row); !s.ok()) return s;
    if (!row) break;
    WindowPoint p;
    p.first_index = std::uint64_t(st.column_int(0));
    p.samples = std::uint64_t(st.column_int(1));
    p.min_v = st.column_double(2);
    p.max_v = st.column_double(3);
    p.mean_v = st.column_double(4);
    p.last_v = st.column_double(5);
    p.total = st.column_double(6);
    p.total_u = st.column_double(7);
    p.utc = run->utc_at_index0 + double(p.first_index) * run->sample_period_s;
    if (out.quantity.empty()) {
      out.quantity = st.column_text(8);
      out.unit = st.column_text(9);
    }
    rows.push_back(p);
  }
  add_cost(st, out);
  out.rows_read += rows.size();
  // Merge neighbouring points so at most max_points come back.
  const std::size_t per = q.max_points == 0 ? 1 : (rows.size() + q.max_points - 1) / std::max<std::size_t>(1, q.max_points);
  if (per <= 1) {
    out.points = std::move(rows);
    return Status::success();
  }
  for (std::size_t i = 0; i < rows.size(); i += per) {
    WindowPoint m = rows[i];
    double weighted = m.mean_v * double(m.samples);
    for (std::size_t j = i + 1; j < std::min(rows.size(), i + per); ++j) {
      const auto& r = rows[j];
      m.min_v = std::min(m.min_v, r.min_v);
      m.max_v = std::max(m.max_v, r.max_v);
      weighted += r.mean_v * double(r.samples);
      m.samples += r.samples;
      m.last_v = r.last_v;
      m.total = r.total;
      m.total_u = r.total_u;
    }
    m.mean_v = weighted / double(std::max<std::uint64_t>(1, m.samples));
    out.points.push_back(m);
  }
  return Status::success();
}

Status Reader::raw_blocks(std::int64_t run_id, std::uint64_t from_index, std::uint64_t to_index,
                          std::vector<RawBlock>& out) {
  out.clear();
  Statement st;
  if (Status s = db_->prepare(
          "SELECT first_index, channel_count, samples, status, encoding, data FROM raw_block"
          " WHERE run_id = ? AND first_index BETWEEN ? AND ? ORDER BY first_index",
          st);
      !s.ok())
    return s;
  st.bind(1, run_id).bind(2, clamp_index(from_index)).bind(3, clamp_index(to_index));
  for (bool row = true;;) {
    if (Status s = st.step(&row); !s.ok()) return s;
    if (!row) break;
    RawBlock b;
    b.run_id = run_id;
    b.first_index = std::uint64_t(st.column_int(0));
    b.channel_count = int(st.column_int(1));
    b.samples = std::uint32_t(st.column_int(2));
    b.status = std::uint32_t(st.column_int(3));
    b.encoding = int(st.column_int(4));
    const auto* data = static_cast<const std::uint8_t*>(sqlite3_column_blob(st.raw(), 5));
    const std::size_t size = std::size_t(sqlite3_column_bytes(st.raw(), 5));
    if (Status s = block_codec::decode(b.encoding, std::span<const std::uint8_t>(data, size), b.channel_count,
                                       std::size_t(b.channel_count) * b.samples, b.codes);
        !s.ok())
      return Status::error(s.code, "run " + std::to_string(run_id) + " block at " + std::to_string(b.first_index) +
                                       ": " + s.message);
    out.push_back(std::move(b));
  }
  return Status::success();
}

}  // namespace accrue::storage
