#include "storage/writer.hpp"

#include <fcntl.h>
#include <sys/stat.h>
#include <sys/statvfs.h>
#include <unistd.h>

#include <cerrno>
#include <cstring>

#include <nlohmann/json.hpp>

#include "storage/block_codec.hpp"
#include "storage/calibration_json.hpp"
#include "storage/chain_settings_json.hpp"
#include "storage/chain_state_json.hpp"
#include "storage/rollup.hpp"
#include "storage/migrations.hpp"
#include "storage/utc.hpp"

namespace accrue::storage {

void RawBlockRow::set_codes(std::span<const std::int32_t> codes, std::vector<std::uint8_t>& scratch) {
  scratch.clear();
  block_codec::encode(codes, channel_count, scratch);
  // A copy of exact size: the encoder's growth would leave up to twice the bytes allocated in the queue.
  data.assign(scratch.begin(), scratch.end());
}

std::size_t Batch::raw_bytes() const {
  std::size_t n = 0;
  for (const auto& r : raw) n += r.data.capacity() + sizeof(RawBlockRow);
  return n;
}

std::size_t Batch::derived_bytes() const {
  std::size_t n = 256 * events.size() + 256;
  for (const auto& c : channels) {
    n += sizeof(chain::SeriesPoint) * c.output.series.size() + sizeof(chain::SegmentRecord) * c.output.segments.size() +
         sizeof(chain::BaselineRecord) * c.output.baselines.size() + sizeof(chain::TotalSnapshot);
  }
  return n;
}

struct Writer::Statements {
  Statement board, board_id, run, run_end, raw, series, segment, baseline, event, checkpoint, calibration, rollup,
      period, derivation, derivation_channel, derivation_total, derivation_end;
};

namespace {

std::optional<std::uint64_t> statvfs_free_bytes(const std::string& path) {
  const auto slash = path.find_last_of('/');
  const std::string dir = slash == std::string::npos ? "." : (slash == 0 ? "/" : path.substr(0, slash));
  struct statvfs v {};
  if (::statvfs(dir.c_str(), &v) != 0) return std::nullopt;
  return std::uint64_t(v.f_bavail) * std::uint64_t(v.f_frsize);
}

bool is_full(const Status& s) { return (s.code & 0xFF) == SQLITE_FULL; }

// Device and inode of a path (false: no such file or not reachable).
bool stat_id(const std::string& path, std::uint64_t& dev, std::uint64_t& ino, int& err) {
  struct stat st {};
  if (::stat(path.c_str(), &st) != 0) {
    err = errno;
    return false;
  }
  dev = std::uint64_t(st.st_dev);
  ino = std::uint64_t(st.st_ino);
  err = 0;
  return true;
}

// fsync of a file or directory by name; VACUUM INTO leaves its output unsynced.
Status sync_path(const std::string& path, bool directory) {
  const int fd = ::open(path.c_str(), (directory ? O_RDONLY | O_DIRECTORY : O_RDONLY) | O_CLOEXEC);
  if (fd < 0) return Status::error(SQLITE_IOERR, "cannot open " + path + " to sync it: " + std::strerror(errno));
  const int rc = ::fsync(fd);
  const int err = errno;
  ::close(fd);
  if (rc != 0) return Status::error(SQLITE_IOERR_FSYNC, "fsync " + path + ": " + std::strerror(err));
  return Status::success();
}

std::string directory_of(const std::string& path) {
  const auto slash = path.find_last_of('/');
  return slash == std::string::npos ? "." : (slash == 0 ? "/" : path.substr(0, slash));
}

// "20261202T041500Z": a file-name-safe UTC stamp.
std::string compact_utc(double unix_s) {
  std::string t = rfc3339_utc(unix_s);  // 2026-12-02T04:15:00.123Z
  std::string out;
  for (char c : t) {
    if (c == '.') break;
    if (c != '-' && c != ':') out += c;
  }
  return out + "Z";
}

std::string sql_quote(const std::string& text) {
  std::string out = "'";
  for (char c : text) {
    out += c;
    if (c == '\'') out += '\'';
  }
  return out + "'";
}

}  // namespace

Writer::Writer(std::unique_ptr<Database> db, std::string path, WriterSettings settings, Clock clock,
               FreeBytes free_bytes)
    : db_(std::move(db)),
      path_(path),
      open_path_(std::move(path)),
      settings_(settings),
      clock_(std::move(clock)),
      free_bytes_(std::move(free_bytes)) {
  wanted_max_file_bytes_ = settings_.max_file_bytes;
  counters_.path = open_path_;
}

Writer::~Writer() { stop(); }

Status Writer::open_connection(const std::string& path, const WriterSettings& settings, std::unique_ptr<Database>& db) {
  if (Status s = Database::open(path, Database::Mode::read_write_create, db); !s.ok()) return s;
  // Refuse a newer file before WAL mode (or anything else) touches it.
  int version = 0;
  if (Status s = check_schema_version(*db, version); !s.ok()) return s;
  if (Status s = configure_writer_connection(*db); !s.ok()) return s;
  if (settings.durable_commits) {
    if (Status s = db->exec("PRAGMA synchronous = FULL"); !s.ok()) return s;
  }
  return Status::success();
}

Status Writer::open(const std::string& path, WriterSettings settings, Clock clock, std::unique_ptr<Writer>& out,
                    FreeBytes free_bytes) {
  std::unique_ptr<Database> db;
  if (Status s = open_connection(path, settings, db); !s.ok()) return s;
  if (Status s = migrate(*db); !s.ok()) return s;
  if (!free_bytes) free_bytes = [path] { return statvfs_free_bytes(path); };
  std::unique_ptr<Writer> w(new Writer(std::move(db), path, settings, std::move(clock), std::move(free_bytes)));
  if (Status s = w->attach_connection(); !s.ok()) return s;
  if (Status s = w->load_calibrations(); !s.ok()) return s;
  w->record_file_ids();
  out = std::move(w);
  return Status::success();
}

Status Writer::attach_connection() {
  // Checkpoints are ours (manage_wal), after commits, so readers see a bounded WAL.
  if (Status s = db_->exec("PRAGMA wal_autocheckpoint = 0"); !s.ok()) return s;
  if (Status s = db_->exec("PRAGMA journal_size_limit = " + std::to_string(settings_.journal_size_limit_bytes));
      !s.ok())
    return s;
  if (Status s = prepare_statements(); !s.ok()) return s;
  // Learn the log's length after each commit (this hook replaces SQLite's automatic checkpoint).
  sqlite3_wal_hook(
      db_->handle(),
      [](void* self, sqlite3*, const char*, int frames) {
        static_cast<Writer*>(self)->wal_frames_ = frames;
        return SQLITE_OK;
      },
      this);
  wal_frames_ = 0;
  return apply_max_file_bytes(applied_max_file_bytes_ ? applied_max_file_bytes_ : settings_.max_file_bytes);
}

Status Writer::apply_max_file_bytes(std::uint64_t bytes) {
  Statement st;
  if (Status s = db_->prepare("PRAGMA page_size", st); !s.ok()) return s;
  bool row = false;
  if (Status s = st.step(&row); !s.ok()) return s;
  const std::uint64_t page = row ? std::uint64_t(st.column_int(0)) : 4096;
  // 0 means no cap: SQLite's own maximum.
  const std::uint64_t pages = bytes == 0 ? 4294967294ull : std::max<std::uint64_t>(1, bytes / page);
  Statement set;
  if (Status s = db_->prepare("PRAGMA max_page_count = " + std::to_string(pages), set); !s.ok()) return s;
  if (Status s = set.run(); !s.ok()) return s;
  applied_max_file_bytes_ = bytes;
  return Status::success();
}

void Writer::set_max_file_bytes(std::uint64_t bytes) {
  std::lock_guard lock(mutex_);
  wanted_max_file_bytes_ = bytes;
}

Status Writer::prepare_statements() {
  st_ = std::make_unique<Statements>();
  struct Item {
    Statement* st;
    const char* sql;
  } items[] = {
      {&st_->board,
       "INSERT INTO board(serial, firmware_version, channel_count, adc_bits, full_scale_v, capabilities, first_seen_utc)"
       " VALUES(?,?,?,?,?,?,?) ON CONFLICT(serial) DO UPDATE SET firmware_version = excluded.firmware_version,"
       " channel_count = excluded.channel_count, adc_bits = excluded.adc_bits, full_scale_v = excluded.full_scale_v,"
       " capabilities = excluded.capabilities"},
      {&st_->board_id, "SELECT board_id FROM board WHERE serial = ?"},
      {&st_->calibration,
       "INSERT INTO calibration(calibration_id, channel, created_utc, quantity, unit, quantity_per_volt, definition)"
       " VALUES(?,?,?,?,?,?,?)"},
      {&st_->run, "INSERT INTO run(run_id, board_id, started_utc, sample_period_s, utc_at_index0) VALUES(?,?,?,?,?)"},
      {&st_->run_end, "UPDATE run SET ended_utc = ?, end_reason = ? WHERE run_id = ?"},
      {&st_->raw,
       "INSERT OR REPLACE INTO raw_block(run_id, first_index, channel_count, samples, status, encoding, data)"
       " VALUES(?,?,?,?,?,2,?)"},
      {&st_->series,
       "INSERT OR REPLACE INTO series_point(run_id, channel, first_index, samples, min_v, max_v, mean_v, last_v, total,"
       " total_u, calibration_id) VALUES(?,?,?,?,?,?,?,?,?,?,?)"},
      {&st_->segment,
       "INSERT OR REPLACE INTO segment(run_id, channel, ordinal, first_index, last_index, start_v, end_v, drift_v,"
       " gap_before_v, gap_before_u_v, end_points_u_v, quantity, baseline_ordinal, flags, total_after, total_u_after,"
       " calibration_id) VALUES(?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?)"},
      {&st_->baseline,
       "INSERT OR REPLACE INTO baseline(run_id, channel, ordinal, first_index, last_index, samples, intercept_v,"
       " slope_v_per_s, slope_se_v_per_s, residual_rms_v) VALUES(?,?,?,?,?,?,?,?,?,?)"},
      {&st_->event,
       "INSERT INTO event(run_id, channel, sample_index, kind, detail, host_utc) VALUES(?,?,?,?,?,?)"},
      {&st_->rollup,
       "INSERT INTO rollup(run_id, channel, width_s, bucket, first_index, last_point_index, points, samples, min_v,"
       " max_v, sum_v, last_v, total, total_u, calibration_id) VALUES(?,?,?,?,?,?,?,?,?,?,?,?,?,?,?)"
       " ON CONFLICT(run_id, derivation, channel, width_s, bucket) DO UPDATE SET last_point_index = excluded.last_point_index,"
       " points = points + excluded.points, samples = samples + excluded.samples, min_v = min(min_v, excluded.min_v),"
       " max_v = max(max_v, excluded.max_v), sum_v = sum_v + excluded.sum_v, last_v = excluded.last_v,"
       " total = excluded.total, total_u = excluded.total_u, calibration_id = excluded.calibration_id"
       // Points already folded in (a re-sent stretch) are not counted twice.
       " WHERE excluded.first_index > rollup.last_point_index"},
      {&st_->period, "SELECT sample_period_s FROM run WHERE run_id = ?"},
      // The live recording is derivation 1 of its run (see schema.sql).
      {&st_->derivation,
       "INSERT OR IGNORE INTO derivation(run_id, derivation, parent, created_utc, who, reason, changes, state)"
       " VALUES(?, 1, NULL, ?, 'accrued', 'recorded live', '{}', 'recorded')"},
      {&st_->derivation_channel,
       "INSERT OR REPLACE INTO derivation_channel(run_id, derivation, channel, calibration_id, baseline, settings,"
       " start_state) VALUES(?, 1, ?, ?, ?, ?, ?)"},
      {&st_->derivation_total,
       "INSERT INTO derivation_channel(run_id, derivation, channel, calibration_id, baseline, last_index, total,"
       " std_uncertainty, segments, flags) VALUES(?1, 1, ?2, ?3, 'unknown', ?4, ?5, ?6, ?7, ?8)"
       " ON CONFLICT(run_id, derivation, channel) DO UPDATE SET last_index = ?4, total = ?5, std_uncertainty = ?6,"
       " segments = ?7, flags = ?8"},
      {&st_->derivation_end, "UPDATE derivation SET finished_utc = ? WHERE run_id = ? AND derivation = 1"},
      {&st_->checkpoint,
       "INSERT OR REPLACE INTO total_checkpoint(channel, run_id, last_index, total, std_uncertainty, segments, flags,"
       " calibration_id, state, committed_utc) VALUES(?,?,?,?,?,?,?,?,?,?)"},
  };
  for (auto& item : items) {
    if (Status s = db_->prepare(item.sql, *item.st); !s.ok()) return s;
  }
  return Status::success();
}

Status Writer::load_calibrations() {
  Statement st;
  if (Status s = db_->prepare("SELECT calibration_id, channel, definition FROM calibration", st); !s.ok()) return s;
  for (bool row = true;;) {
    if (Status s = st.step(&row); !s.ok()) return s;
    if (!row) break;
    const std::int64_t id = st.column_int(0);
    // The newest version with a given definition wins, as it would for a new lookup.
    auto& slot = calibration_ids_[{int(st.column_int(1)), st.column_text(2)}];
    slot = std::max(slot, id);
    next_calibration_id_ = std::max(next_calibration_id_, id + 1);
  }
  return Status::success();
}

Status Writer::ensure_calibration(int channel, chain::Calibration& cal) {
  std::string text = calibration_definition(cal);
  std::lock_guard lock(mutex_);
  auto [it, inserted] = calibration_ids_.try_emplace({channel, text}, next_calibration_id_);
  cal.id = it->second;
  if (!inserted) return Status::success();
  ++next_calibration_id_;
  // Written by the writer thread at the start of its next transaction, before
  // any row that names it (every batch that can name it is submitted later).
  new_calibrations_.push_back({cal.id, channel, clock_(), std::string(cal.quantity_name()), std::string(cal.unit()),
                               cal.quantity_per_volt(), std::move(text)});
  return Status::success();
}

Status Writer::write_calibrations(const std::vector<CalibrationRow>& rows) {
  for (const auto& c : rows) {
    st_->calibration.bind(1, c.id)
        .bind(2, std::int64_t(c.channel))
        .bind(3, rfc3339_utc(c.created_unix))
        .bind(4, c.quantity)
        .bind(5, c.unit)
        .bind(6, c.quantity_per_volt)
        .bind(7, c.definition);
    if (Status s = st_->calibration.run(); !s.ok()) return s;
  }
  return Status::success();
}

Status Writer::next_run_id(std::int64_t& out) {
  Statement st;
  if (Status s = db_->prepare("SELECT COALESCE(MAX(run_id), 0) + 1 FROM run", st); !s.ok()) return s;
  bool row = false;
  if (Status s = st.step(&row); !s.ok()) return s;
  out = row ? st.column_int(0) : 1;
  return Status::success();
}

void Writer::start() {
  if (!thread_.joinable()) thread_ = std::thread([this] { thread_main(); });
}

void Writer::submit(Batch batch) {
  std::lock_guard lock(mutex_);
  ++counters_.batches_accepted;
  // Raw blocks are taken only while the queue, with the whole batch, stays within the soft limit.
  const std::size_t derived = batch.derived_bytes();
  if (counters_.queued_bytes + derived + batch.raw_bytes() > settings_.soft_limit_bytes && !batch.raw.empty()) {
    counters_.raw_blocks_shed += batch.raw.size();
    batch.raw.clear();
    shed_notice_pending_ = true;
  }
  if (counters_.queued_bytes + derived > settings_.hard_limit_bytes) {
    for (auto& c : batch.channels) {
      counters_.series_points_shed += c.output.series.size();
      c.output.series.clear();
    }
    shed_notice_pending_ = true;
  }
  if (shed_notice_pending_ && counters_.queued_bytes < settings_.soft_limit_bytes / 2) {
    // Say so once the queue has room again, with the counts so far.
    batch.events.push_back({std::nullopt, std::nullopt, std::nullopt, "writer_shed",
                            "raw_blocks_shed=" + std::to_string(counters_.raw_blocks_shed) +
                                " series_points_shed=" + std::to_string(counters_.series_points_shed),
                            clock_()});
    shed_notice_pending_ = false;
  }
  counters_.queued_bytes += batch.raw_bytes() + batch.derived_bytes();
  counters_.queued_bytes_peak = std::max(counters_.queued_bytes_peak, counters_.queued_bytes);
  queue_.push_back(std::move(batch));
  if (counters_.queued_bytes > settings_.soft_limit_bytes / 4) wake_.notify_one();
}

WriterCounters Writer::counters() const {
  std::lock_guard lock(mutex_);
  return counters_;
}

void Writer::stop() {
  {
    std::lock_guard lock(mutex_);
    if (stopping_ && !thread_.joinable()) return;
    stopping_ = true;
  }
  wake_.notify_one();
  if (thread_.joinable()) thread_.join();
  if (!queue_.empty()) {
    // Never started (or stopped before the thread ran): commit here.
    std::deque<Batch> pending;
    pending.swap(queue_);
    for (auto& c : new_calibrations_) calibrations_.push_back(std::move(c));
    new_calibrations_.clear();
    cycle(pending);
  }
}

void Writer::thread_main() {
  std::deque<Batch> pending;  // taken from the queue, not yet committed
  int failures_at_stop = 0;
  for (;;) {
    bool stopping = false;
    {
      std::unique_lock lock(mutex_);
      // While commits fail, wait longer each time (the delay doubles, see cycle()).
      const auto wait = counters_.consecutive_failures > 0 ? std::chrono::milliseconds(counters_.retry_delay_ms)
                                                           : settings_.commit_interval;
      wake_.wait_for(lock, wait, [&] { return stopping_; });
      stopping = stopping_;
      while (!queue_.empty()) {
        pending.push_back(std::move(queue_.front()));
        queue_.pop_front();
      }
      for (auto& c : new_calibrations_) calibrations_.push_back(std::move(c));
      new_calibrations_.clear();
    }
    bool give_up = false;
    if (!pending.empty() || !calibrations_.empty()) {
      cycle(pending);
      give_up = !pending.empty() && stopping && ++failures_at_stop >= 3;  // logged in counters; nothing more to try
    }
    bool done = give_up;
    if (!done && stopping && pending.empty()) {
      std::lock_guard lock(mutex_);
      done = queue_.empty();
    }
    {
      std::lock_guard lock(mutex_);
      thread_done_ = done;
    }
    progress_.notify_all();
    if (done) return;
  }
}

bool Writer::wait_until(const std::function<bool(const WriterCounters&)>& pred) {
  std::unique_lock lock(mutex_);
  progress_.wait(lock, [&] { return pred(counters_) || thread_done_; });
  return pred(counters_);
}

void Writer::note(bool is_error, const std::string& message) {
  if (notice_) notice_(is_error, message);
}

void Writer::record_file_ids() {
  int err = 0;
  const auto id = [&](const std::string& p, FileId& out) {
    FileId f;
    f.known = stat_id(p, f.dev, f.ino, err);
    if (f.known) out = f;
  };
  id(open_path_, db_id_);
  id(open_path_ + "-wal", wal_id_);
  id(open_path_ + "-shm", shm_id_);
}

void Writer::check_file_identity(std::deque<Batch>& pending) {
  if (!settings_.check_file_identity || !db_ || !db_id_.known) return;
  std::uint64_t dev = 0, ino = 0;
  int err = 0;
  const bool present = stat_id(open_path_, dev, ino, err);
  if (present && dev == db_id_.dev && ino == db_id_.ino) {
    // Still ours: learn the -wal/-shm files too, so a rescue removes only ours.
    record_file_ids();
    return;
  }
  if (!present && err != ENOENT && err != ENOTDIR) return;  // cannot tell (EACCES, ...): keep writing
  const double now = clock_();
  const std::string was = open_path_;
  const std::string kind = present ? "database_replaced" : "database_deleted";
  bool first = false;
  {
    std::lock_guard lock(mutex_);
    first = next_rescue_unix_ == 0.0;
    if (first) ++(present ? counters_.file_replaced : counters_.file_deleted);
  }
  if (first) {
    note(true, present ? "database file " + was + " was replaced by another file under the running daemon" +
                             " (inode " + std::to_string(db_id_.ino) + " -> " + std::to_string(ino) +
                             "); that file is left alone and the open database is copied aside"
                       : "database file " + was + " was deleted while open; copying the open database back to it");
  } else if (now < next_rescue_unix_) {
    return;  // a failed rescue is retried later
  }
  // Deleted: the copy takes the path again. Replaced: a new sibling name, never the stranger's file.
  std::string target = was;
  if (present) {
    const std::string base = path_ + ".rescued-" + compact_utc(now);
    target = base;
    std::uint64_t d = 0, i = 0;
    for (int n = 2; stat_id(target, d, i, err) || err != ENOENT; ++n) {
      if (n > 100) break;
      target = base + "-" + std::to_string(n);
    }
  }
  std::string written_to;
  const Status s = rescue(target, !present, written_to);
  if (!s.ok()) {
    next_rescue_unix_ = now + settings_.full_retry_interval_s;
    {
      std::lock_guard lock(mutex_);
      ++counters_.file_rescue_failures;
      counters_.last_error = "rescue of " + was + ": " + s.message;
    }
    note(true, "cannot rescue the database that was at " + was + ": " + s.message +
                   (db_ ? "; still writing to the open file, which is lost when the daemon stops"
                        : "; data stays queued until a database can be opened"));
    return;
  }
  next_rescue_unix_ = 0.0;
  {
    std::lock_guard lock(mutex_);
    ++counters_.file_rescues;
    counters_.path = open_path_;
  }
  const std::string detail = "path=" + was + " inode_was=" + std::to_string(db_id_.ino) +
                             (present ? " replaced_by_inode=" + std::to_string(ino) : std::string()) +
                             " rescued_to=" + written_to;
  writer_event(pending, kind, detail);
  note(true, kind + ": every committed row was copied to " + written_to + "; writing continues there");
  db_id_ = {};
  record_file_ids();
}

Status Writer::rescue(const std::string& target, bool take_path, std::string& written_to) {
  const std::string was = open_path_;
  // Deleted: copy beside it first, then link into the path (link never replaces a file
  // someone put there meanwhile). Replaced: copy straight to the new sibling.
  const std::string copy = take_path ? target + ".rescue-tmp" : target;
  if (db_) {
    if (take_path) (void)::unlink(copy.c_str());  // a half-written copy of an earlier attempt (ours)
    if (Status s = db_->exec("VACUUM INTO " + sql_quote(copy)); !s.ok()) {
      (void)::unlink(copy.c_str());
      return Status::error(s.code, "VACUUM INTO " + copy + ": " + s.message);
    }
    if (Status s = sync_path(copy, false); !s.ok()) return s;
    // Close the old file, then remove its -wal/-shm if they are still ours: SQLite would
    // otherwise pair that log with whatever file takes the path and corrupt it.
    st_.reset();
    db_.reset();
    int err = 0;
    for (const auto& [suffix, id] : {std::pair{"-wal", wal_id_}, std::pair{"-shm", shm_id_}}) {
      std::uint64_t d = 0, i = 0;
      const std::string p = was + suffix;
      if (id.known && stat_id(p, d, i, err) && d == id.dev && i == id.ino) (void)::unlink(p.c_str());
    }
    wal_id_ = shm_id_ = {};
    written_to = copy;
    if (take_path) {
      if (::link(copy.c_str(), target.c_str()) == 0) {
        (void)::unlink(copy.c_str());
        written_to = target;
      } else {
        // Someone created the path meanwhile: keep the copy beside it under a rescued name.
        const std::string aside = path_ + ".rescued-" + compact_utc(clock_());
        if (::rename(copy.c_str(), aside.c_str()) == 0) written_to = aside;
      }
    }
    (void)sync_path(directory_of(written_to), true);  // the new name survives a power cut
    open_path_ = written_to;
  }
  std::unique_ptr<Database> db;
  if (Status s = open_connection(open_path_, settings_, db); !s.ok()) return s;
  db_ = std::move(db);
  if (Status s = attach_connection(); !s.ok()) {
    st_.reset();
    db_.reset();
    return s;
  }
  written_to = open_path_;
  return Status::success();
}

void Writer::writer_event(std::deque<Batch>& pending, std::string kind, std::string detail) {
  if (pending.empty()) pending.emplace_back();
  pending.back().events.push_back({std::nullopt, std::nullopt, std::nullopt, std::move(kind), std::move(detail), clock_()});
  std::lock_guard lock(mutex_);
  counters_.queued_bytes += 256;
  counters_.queued_bytes_peak = std::max(counters_.queued_bytes_peak, counters_.queued_bytes);
}

// One commit cycle: the disk policy decides whether raw rows go in, then the
// commit, then WAL and retention housekeeping.
void Writer::cycle(std::deque<Batch>& pending) {
  if (!db_) {
    // A rescue closed the old file but could not open the new one: try again.
    std::string ignored;
    if (clock_() >= next_rescue_unix_) {
      if (rescue(open_path_, false, ignored).ok()) {
        next_rescue_unix_ = 0.0;
        db_id_ = {};
        record_file_ids();
        note(false, "database reopened at " + open_path_);
      } else {
        next_rescue_unix_ = clock_() + settings_.full_retry_interval_s;
      }
    }
  }
  check_file_identity(pending);
  std::uint64_t wanted_cap = 0;
  {
    std::lock_guard lock(mutex_);
    wanted_cap = wanted_max_file_bytes_;
  }
  if (db_ && wanted_cap != applied_max_file_bytes_) {
    if (Status s = apply_max_file_bytes(wanted_cap); !s.ok()) {
      std::lock_guard lock(mutex_);
      counters_.last_error = s.message;
    }
  }
  const double now = clock_();
  const std::optional<std::uint64_t> free = free_bytes_ ? free_bytes_() : std::nullopt;
  const auto stop_raw = [&](RawStop why, const std::string& detail) {
    raw_stop_ = why;
    raw_stop_since_unix_ = now;
    writer_event(pending, "raw_writing_stopped", detail);
    std::lock_guard lock(mutex_);
    ++counters_.raw_stops;
    counters_.raw_stopped = true;
  };
  const auto resume_raw = [&](const std::string& detail) {
    raw_stop_ = RawStop::none;
    writer_event(pending, "raw_writing_resumed", detail);
    std::lock_guard lock(mutex_);
    counters_.raw_stopped = false;
  };
  if (free && *free < settings_.disk_floor_bytes && raw_stop_ != RawStop::floor) {
    stop_raw(RawStop::floor, "free_bytes=" + std::to_string(*free) + " floor_bytes=" + std::to_string(settings_.disk_floor_bytes));
  } else if (raw_stop_ == RawStop::floor && free && *free >= settings_.disk_floor_bytes + settings_.disk_floor_bytes / 10) {
    resume_raw("free_bytes=" + std::to_string(*free));
  }
  bool probe = raw_stop_ == RawStop::full && now - raw_stop_since_unix_ >= settings_.full_retry_interval_s;
  Status s = commit(pending, raw_stop_ == RawStop::none || probe);
  if (s.ok() && probe) {
    resume_raw("a commit with raw blocks fits again");
    s = commit(pending, true);  // the event itself
  } else if (!s.ok() && is_full(s)) {
    if (raw_stop_ == RawStop::none) {
      stop_raw(RawStop::full, "database or disk is full: " + s.message);
    } else if (probe) {
      raw_stop_since_unix_ = now;  // still full: next probe later
    }
    // Raw rows are shed now (counted in commit); derived rows may still fit.
    s = commit(pending, false);
  }
  track_outage(pending, s, now);
  if (s.ok()) {
    manage_wal();
    if (now - last_retention_unix_ >= settings_.retention_interval_s) {
      last_retention_unix_ = now;
      apply_retention();
    }
  }
}

void Writer::track_outage(std::deque<Batch>& pending, Status& s, double now) {
  if (!s.ok()) {
    std::uint64_t failures = 0, delay_ms = 0;
    std::size_t queued = 0;
    {
      std::lock_guard lock(mutex_);
      if (!is_full(s)) ++counters_.write_errors;
      failures = ++counters_.consecutive_failures;
      if (failures == 1) counters_.failing_since_unix = now;
      const std::uint64_t base_ms = std::max<std::uint64_t>(1, std::uint64_t(settings_.commit_interval.count()));
      const std::uint64_t max_ms = std::max<std::uint64_t>(base_ms, std::uint64_t(settings_.max_retry_interval.count()));
      delay_ms = std::min(max_ms, base_ms << std::min<std::uint64_t>(failures - 1, 20));
      counters_.retry_delay_ms = delay_ms;
      queued = counters_.queued_bytes;
    }
    // Said at the 1st, 2nd, 4th, 8th... failure in a row, so a long outage does not flood the log.
    if ((failures & (failures - 1)) == 0)
      note(true, "database writes are failing (" + std::to_string(failures) + " in a row): " + s.message + "; " +
                     std::to_string(queued) + " bytes stay queued, next attempt in " + std::to_string(delay_ms) + " ms");
    return;
  }
  std::uint64_t failures = 0, raw_shed = 0, series_shed = 0;
  double since = 0.0;
  {
    std::lock_guard lock(mutex_);
    failures = counters_.consecutive_failures;
    if (failures == 0) {
      // Shedding of an outage may begin before its first failed commit: count from the last success.
      outage_raw_shed_ = counters_.raw_blocks_shed + counters_.raw_blocks_shed_disk;
      outage_series_shed_ = counters_.series_points_shed;
      return;
    }
    since = counters_.failing_since_unix;
    raw_shed = counters_.raw_blocks_shed + counters_.raw_blocks_shed_disk - outage_raw_shed_;
    series_shed = counters_.series_points_shed - outage_series_shed_;
    counters_.consecutive_failures = 0;
    counters_.failing_since_unix = 0.0;
    counters_.retry_delay_ms = 0;
    ++counters_.storage_recoveries;
  }
  const std::string detail = "failed_commits=" + std::to_string(failures) + " outage_s=" + std::to_string(now - since) +
                             " raw_blocks_shed=" + std::to_string(raw_shed) +
                             " series_points_shed=" + std::to_string(series_shed);
  writer_event(pending, "storage_recovered", detail);
  s = commit(pending, raw_stop_ == RawStop::none);
  note(false, "database writes work again: " + detail);
}

Status Writer::commit(std::deque<Batch>& pending, bool with_raw) {
  if (pending.empty() && calibrations_.empty()) return Status::success();
  if (!db_) return Status::error(SQLITE_CANTOPEN, "no database open at " + open_path_);
  const auto t0 = std::chrono::steady_clock::now();  // latency figure only, no decision depends on it
  std::size_t bytes = 0;
  attempt_raw_bytes_ = 0;
  Status s = db_->exec("BEGIN IMMEDIATE");
  if (s.ok()) s = write_calibrations(calibrations_);
  if (s.ok()) {
    for (const Batch& b : pending) {
      if (s = write_batch(b, with_raw); !s.ok()) break;
      bytes += b.raw_bytes() + b.derived_bytes();
    }
  }
  if (s.ok()) s = db_->exec("COMMIT");
  const double ms = std::chrono::duration<double, std::milli>(std::chrono::steady_clock::now() - t0).count();
  std::lock_guard lock(mutex_);
  if (!s.ok()) {
    (void)db_->exec("ROLLBACK");  // the statement's error is the one to report
    ++counters_.commit_failures;
    if (is_full(s)) ++counters_.disk_full_errors;
    counters_.last_error = s.message;
    if (!with_raw) {
      // Raw writing is stopped: what is held is shed, not retried (counted).
      for (Batch& b : pending) {
        counters_.raw_blocks_shed_disk += b.raw.size();
        const std::size_t raw = b.raw_bytes();
        b.raw.clear();
        counters_.queued_bytes -= std::min(counters_.queued_bytes, raw);
      }
    }
    return s;
  }
  ++counters_.commits;
  counters_.last_commit_unix = clock_();
  counters_.last_commit_ms = ms;
  counters_.max_commit_ms = std::max(counters_.max_commit_ms, ms);
  counters_.sum_commit_ms += ms;
  counters_.raw_bytes_written += attempt_raw_bytes_;
  counters_.queued_bytes -= std::min(counters_.queued_bytes, bytes);
  for (const Batch& b : pending) {
    if (with_raw) {
      counters_.raw_blocks_written += b.raw.size();
      for (const auto& r : b.raw) counters_.raw_samples_written += r.code_count();
    } else {
      counters_.raw_blocks_shed_disk += b.raw.size();
    }
    counters_.events_written += b.events.size();
    for (const auto& c : b.channels) {
      counters_.series_points_written += c.output.series.size();
      counters_.segments_written += c.output.segments.size();
      if (c.checkpoint) counters_.committed_last_index[c.channel] = c.checkpoint->last_index;
    }
  }
  pending.clear();
  calibrations_.clear();
  return s;
}

void Writer::manage_wal() {
  if (wal_frames_ < settings_.wal_checkpoint_frames) return;
  int frames = 0, done = 0;
  // Passive: never waits for readers; with journal_size_limit the file shrinks
  // back when the log restarts.
  const int rc = sqlite3_wal_checkpoint_v2(db_->handle(), nullptr, SQLITE_CHECKPOINT_PASSIVE, &frames, &done);
  std::lock_guard lock(mutex_);
  if (rc != SQLITE_OK && rc != SQLITE_BUSY) {
    counters_.last_error = std::string("wal checkpoint: ") + sqlite3_errmsg(db_->handle());
    return;
  }
  counters_.wal_frames = frames;
  ++counters_.wal_checkpoints;
}

void Writer::apply_retention() {
  const double now = clock_();
  struct Rule {
    const char* sql;  // ?1 run, ?2 cutoff index, ?3 width (rollups)
    double keep_s;
    std::int64_t width_s;
  };
  std::vector<Rule> rules;
  if (settings_.raw_keep_s > 0)
    rules.push_back({"DELETE FROM raw_block WHERE run_id = ?1 AND first_index + samples <= ?2", settings_.raw_keep_s, 0});
  if (settings_.series_keep_s > 0)
    rules.push_back(
        {"DELETE FROM series_point WHERE run_id = ?1 AND first_index + samples <= ?2", settings_.series_keep_s, 0});
  for (const auto& [width_s, keep_s] : settings_.rollup_keep_s)
    if (keep_s > 0)
      rules.push_back({"DELETE FROM rollup WHERE run_id = ?1 AND width_s = ?3 AND first_index < ?2", keep_s, width_s});
  if (rules.empty()) return;
  std::uint64_t deleted = 0;
  Status s = db_->exec("BEGIN IMMEDIATE");
  Statement runs;
  if (s.ok()) s = db_->prepare("SELECT run_id, utc_at_index0, sample_period_s FROM run", runs);
  std::vector<std::tuple<std::int64_t, double, double>> run_list;
  for (bool row = true; s.ok();) {
    if (s = runs.step(&row); !s.ok() || !row) break;
    run_list.emplace_back(runs.column_int(0), runs.column_double(1), runs.column_double(2));
  }
  for (const Rule& r : rules) {
    if (!s.ok()) break;
    Statement del;
    if (s = db_->prepare(r.sql, del); !s.ok()) break;
    for (const auto& [run_id, utc0, period] : run_list) {
      if (!(period > 0)) continue;
      const double cutoff = (now - r.keep_s - utc0) / period;
      if (cutoff <= 0) continue;
      del.bind(1, run_id).bind(2, std::int64_t(std::min(cutoff, 9.0e18)));
      if (r.width_s) del.bind(3, r.width_s);
      if (s = del.run(); !s.ok()) break;
      deleted += std::uint64_t(sqlite3_changes(db_->handle()));
    }
  }
  if (s.ok()) s = db_->exec("COMMIT");
  std::lock_guard lock(mutex_);
  if (!s.ok()) {
    (void)db_->exec("ROLLBACK");
    counters_.last_error = "retention: " + s.message;
    return;
  }
  ++counters_.retention_passes;
  counters_.rows_deleted_by_retention += deleted;
}

Status Writer::sample_period(std::int64_t run_id, double& out) {
  if (auto it = period_by_run_.find(run_id); it != period_by_run_.end()) {
    out = it->second;
    return Status::success();
  }
  st_->period.bind(1, run_id);
  bool row = false;
  Status s = st_->period.step(&row);
  out = row ? st_->period.column_double(0) : 0.0;
  st_->period.reset();
  if (!s.ok()) return s;
  if (!row) return Status::error(SQLITE_CONSTRAINT, "rollup: run " + std::to_string(run_id) + " is not recorded");
  period_by_run_[run_id] = out;
  return Status::success();
}

Status Writer::write_rollups(const ChannelRows& c) {
  if (c.output.series.empty()) return Status::success();
  double period = 0.0;
  if (Status s = sample_period(c.run_id, period); !s.ok()) return s;
  for (const rollup::Bucket& k : rollup::fold_points(c.output.series, period)) {
    st_->rollup.bind(1, c.run_id)
        .bind(2, std::int64_t(c.channel))
        .bind(3, k.width_s)
        .bind(4, std::int64_t(k.bucket))
        .bind(5, std::int64_t(k.first_index))
        .bind(6, std::int64_t(k.last_point_index))
        .bind(7, std::int64_t(k.points))
        .bind(8, std::int64_t(k.samples))
        .bind(9, k.min_v)
        .bind(10, k.max_v)
        .bind(11, k.sum_v)
        .bind(12, k.last_v)
        .bind(13, k.total)
        .bind(14, k.total_u)
        .bind(15, c.calibration_id);
    if (Status s = st_->rollup.run(); !s.ok()) return s;
  }
  return Status::success();
}

Status Writer::write_batch(const Batch& b, bool with_raw) {
  Statements& st = *st_;
  if (b.run_start) {
    const auto& r = *b.run_start;
    st.board.bind(1, std::int64_t(r.board.board_serial))
        .bind(2, std::int64_t(r.board.firmware_version))
        .bind(3, std::int64_t(r.board.channel_count))
        .bind(4, std::int64_t(r.board.adc_bits))
        .bind(5, r.board.full_scale_v)
        .bind(6, std::int64_t(r.board.capabilities))
        .bind(7, rfc3339_utc(r.started_unix));
    if (Status s = st.board.run(); !s.ok()) return s;
    st.board_id.bind(1, std::int64_t(r.board.board_serial));
    bool row = false;
    Status s = st.board_id.step(&row);
    const std::int64_t board_id = row ? st.board_id.column_int(0) : 0;
    st.board_id.reset();
    if (!s.ok()) return s;
    st.run.bind(1, r.run_id)
        .bind(2, board_id)
        .bind(3, rfc3339_utc(r.started_unix))
        .bind(4, r.board.sample_period_s)
        .bind(5, r.utc_at_index0);
    if (Status s2 = st.run.run(); !s2.ok()) return s2;
    period_by_run_[r.run_id] = r.board.sample_period_s;
    st.derivation.bind(1, r.run_id).bind(2, rfc3339_utc(r.started_unix));
    if (Status s2 = st.derivation.run(); !s2.ok()) return s2;
    for (const RunChannelStart& c : b.run_channels) {
      st.derivation_channel.bind(1, r.run_id)
          .bind(2, std::int64_t(c.channel))
          .bind(3, c.calibration_id)
          .bind(4, baseline_text(c.settings))
          .bind(5, chain_settings_to_json(c.settings));
      if (c.start_state) st.derivation_channel.bind(6, chain_state_to_json(*c.start_state));
      else st.derivation_channel.bind_null(6);
      if (Status s2 = st.derivation_channel.run(); !s2.ok()) return s2;
    }
  }
  for (const auto& r : b.raw) {
    if (!with_raw) break;
    attempt_raw_bytes_ += r.data.size();
    st.raw.bind(1, r.run_id)
        .bind(2, std::int64_t(r.first_index))
        .bind(3, std::int64_t(r.channel_count))
        .bind(4, std::int64_t(r.samples))
        .bind(5, std::int64_t(r.status))
        .bind(6, std::span<const std::uint8_t>(r.data));
    if (Status s = st.raw.run(); !s.ok()) return s;
  }
  for (const auto& c : b.channels) {
    const std::int64_t ch = c.channel;
    for (const auto& p : c.output.series) {
      st.series.bind(1, c.run_id)
          .bind(2, ch)
          .bind(3, std::int64_t(p.first_index))
          .bind(4, std::int64_t(p.samples))
          .bind(5, p.min_v)
          .bind(6, p.max_v)
          .bind(7, p.mean_v)
          .bind(8, p.last_v)
          .bind(9, p.total)
          .bind(10, p.total_u)
          .bind(11, c.calibration_id);
      if (Status s = st.series.run(); !s.ok()) return s;
    }
    if (Status s = write_rollups(c); !s.ok()) return s;
    for (const auto& g : c.output.baselines) {
      st.baseline.bind(1, c.run_id)
          .bind(2, ch)
          .bind(3, std::int64_t(g.ordinal))
          .bind(4, std::int64_t(g.first_index))
          .bind(5, std::int64_t(g.last_index))
          .bind(6, std::int64_t(g.samples))
          .bind(7, g.intercept_v)
          .bind(8, g.slope_v_per_s)
          .bind(9, g.slope_se_v_per_s)
          .bind(10, g.residual_rms_v);
      if (Status s = st.baseline.run(); !s.ok()) return s;
    }
    // A checkpoint's open segment is stored provisionally under the ordinal it
    // will keep, so the segment rows always add up to the committed total; the
    // closed segment replaces it later.
    std::vector<const chain::SegmentRecord*> segments;
    for (const auto& g : c.output.segments) segments.push_back(&g);
    if (c.checkpoint && c.checkpoint->open_segment) segments.push_back(&*c.checkpoint->open_segment);
    for (const chain::SegmentRecord* seg : segments) {
      const auto& g = *seg;
      st.segment.bind(1, c.run_id)
          .bind(2, ch)
          .bind(3, std::int64_t(g.ordinal))
          .bind(4, std::int64_t(g.first_index))
          .bind(5, std::int64_t(g.last_index))
          .bind(6, g.start_v)
          .bind(7, g.end_v)
          .bind(8, g.drift_v)
          .bind(9, g.gap_before_v)
          .bind(10, g.gap_before_u_v)
          .bind(11, g.end_points_u_v)
          .bind(12, g.quantity)
          .bind(13, std::int64_t(g.baseline_ordinal))
          .bind(14, std::int64_t(g.flags))
          .bind(15, g.total_after)
          .bind(16, g.total_u_after)
          .bind(17, c.calibration_id);
      if (Status s = st.segment.run(); !s.ok()) return s;
    }
    if (c.checkpoint) {
      const auto& t = *c.checkpoint;
      st.checkpoint.bind(1, ch)
          .bind(2, c.run_id)
          .bind(3, std::int64_t(t.last_index))
          .bind(4, t.total)
          .bind(5, t.std_uncertainty)
          .bind(6, std::int64_t(t.segments))
          .bind(7, std::int64_t(t.flags))
          .bind(8, c.calibration_id)
          .bind(9, chain_state_to_json(t.state))
          .bind(10, rfc3339_utc(clock_()));
      if (Status s = st.checkpoint.run(); !s.ok()) return s;
      st.derivation_total.bind(1, c.run_id)
          .bind(2, ch)
          .bind(3, c.calibration_id)
          .bind(4, std::int64_t(t.last_index))
          .bind(5, t.total)
          .bind(6, t.std_uncertainty)
          .bind(7, std::int64_t(t.segments))
          .bind(8, std::int64_t(t.flags));
      if (Status s = st.derivation_total.run(); !s.ok()) return s;
    }
  }
  for (const auto& e : b.events) {
    if (e.run_id) st.event.bind(1, *e.run_id); else st.event.bind_null(1);
    if (e.channel) st.event.bind(2, std::int64_t(*e.channel)); else st.event.bind_null(2);
    if (e.sample_index) st.event.bind(3, std::int64_t(*e.sample_index)); else st.event.bind_null(3);
    st.event.bind(4, e.kind).bind(5, e.detail).bind(6, rfc3339_utc(e.host_unix));
    if (Status s = st.event.run(); !s.ok()) return s;
  }
  if (b.run_end) {
    st.run_end.bind(1, rfc3339_utc(b.run_end->ended_unix)).bind(2, b.run_end->reason).bind(3, b.run_end->run_id);
    if (Status s = st.run_end.run(); !s.ok()) return s;
    st.derivation_end.bind(1, rfc3339_utc(b.run_end->ended_unix)).bind(2, b.run_end->run_id);
    if (Status s = st.derivation_end.run(); !s.ok()) return s;
  }
  return Status::success();
}

}  // namespace accrue::storage
