#include "storage/reader.hpp"

#include <algorithm>

#include "storage/chain_state_json.hpp"

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

Status Reader::window(const WindowQuery& q, WindowResult& out) {
  out = WindowResult{};
  std::optional<RunInfo> run;
  if (Status s = q.run_id ? run_by_id(*q.run_id, run) : latest_run(run); !s.ok()) return s;
  if (!run) return Status::error(SQLITE_NOTFOUND, q.run_id ? "no such run" : "no runs recorded yet");
  out.run = *run;
  Statement st;
  if (Status s = db_->prepare(
          "SELECT p.first_index, p.samples, p.min_v, p.max_v, p.mean_v, p.last_v, p.total, p.total_u, c.quantity, c.unit"
          " FROM series_point p JOIN calibration c USING (calibration_id)"
          " WHERE p.run_id = ? AND p.channel = ? AND p.first_index BETWEEN ? AND ? ORDER BY p.first_index",
          st);
      !s.ok())
    return s;
  const auto clamp = [](std::uint64_t v) { return std::int64_t(std::min<std::uint64_t>(v, INT64_MAX)); };
  st.bind(1, run->run_id).bind(2, std::int64_t(q.channel)).bind(3, clamp(q.from_index)).bind(4, clamp(q.to_index));
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
  out.rows_read = rows.size();
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

}  // namespace accrue::storage
