#include "storage/reprocess.hpp"

#include <algorithm>
#include <cmath>
#include <filesystem>
#include <memory>
#include <span>

#include <nlohmann/json.hpp>

#include "protocol/messages.hpp"
#include "storage/block_codec.hpp"
#include "storage/calibration_json.hpp"
#include "storage/chain_settings_json.hpp"
#include "storage/chain_state_json.hpp"
#include "storage/database.hpp"
#include "storage/migrations.hpp"
#include "storage/rollup.hpp"
#include "storage/utc.hpp"

namespace accrue::storage {
namespace {

using nlohmann::json;

struct Channel {
  int channel = 0;
  chain::Calibration calibration;
  std::string parent_definition;
  chain::ChainSettings settings;
  std::optional<chain::ChainState> start_state;
  std::unique_ptr<chain::ChannelChain> chain;
  chain::ChainOutput out;
  // Zero windows (sample indices, inclusive) to treat as plain dead time.
  std::vector<std::pair<std::uint64_t, std::uint64_t>> dead_zero_windows;
  std::optional<double> parent_total;
  json changed = json::object();
};

// One reprocessing: the connection, the run, its channels.
class Job {
 public:
  Job(Database& db, const ReprocessRequest& req, const std::function<double()>& clock)
      : db_(db), req_(req), clock_(clock) {}

  Status prepare(ReprocessResult& out, const CalibrationIds& calibration_ids);
  Status create_derivation(ReprocessResult& out);
  Status recompute(const ReprocessProgressFn& progress, ReprocessResult& out);
  void mark_failed(const std::string& why);

 private:
  Status load_channels();
  Status apply_change(const ChannelChange& c);
  Status resolve_calibration(Channel& ch, const CalibrationIds& calibration_ids);
  Status write_outputs();
  Status write_channel(Channel& ch);
  Status finish(ReprocessResult& out);
  Status one_value(const std::string& sql, std::int64_t& value, bool& found);

  Database& db_;
  const ReprocessRequest& req_;
  const std::function<double()>& clock_;
  double sample_period_s_ = 0.0;
  bool run_ended_ = false;
  int parent_ = 0;
  int derivation_ = 0;
  bool settings_recorded_ = true;
  std::vector<Channel> channels_;
  Statement series_, rollup_, baseline_, segment_;
};

Status Job::one_value(const std::string& sql, std::int64_t& value, bool& found) {
  Statement st;
  if (Status s = db_.prepare(sql, st); !s.ok()) return s;
  st.bind(1, req_.run_id);
  bool row = false;
  if (Status s = st.step(&row); !s.ok()) return s;
  found = row && !st.column_is_null(0);
  if (found) value = st.column_int(0);
  return Status::success();
}

Status Job::prepare(ReprocessResult& out, const CalibrationIds& calibration_ids) {
  {
    Statement st;
    if (Status s = db_.prepare("SELECT sample_period_s, ended_utc IS NOT NULL FROM run WHERE run_id = ?", st); !s.ok())
      return s;
    st.bind(1, req_.run_id);
    bool row = false;
    if (Status s = st.step(&row); !s.ok()) return s;
    if (!row) return Status::error(SQLITE_NOTFOUND, "no run " + std::to_string(req_.run_id) + " in the database");
    sample_period_s_ = st.column_double(0);
    run_ended_ = st.column_int(1) != 0;
  }
  {
    Statement st;
    if (Status s = db_.prepare(
            "SELECT MAX(derivation) FROM derivation WHERE run_id = ?1 AND state IN ('recorded', 'complete')"
            " AND (?2 IS NULL OR derivation = ?2)",
            st);
        !s.ok())
      return s;
    st.bind(1, req_.run_id);
    if (req_.parent) st.bind(2, std::int64_t(*req_.parent));
    else st.bind_null(2);
    bool row = false;
    if (Status s = st.step(&row); !s.ok()) return s;
    if (!row || st.column_is_null(0))
      return Status::error(SQLITE_NOTFOUND, "run " + std::to_string(req_.run_id) + " has no " +
                                                (req_.parent ? "derivation " + std::to_string(*req_.parent) + " that can be read"
                                                             : std::string("derivation to start from")));
    parent_ = int(st.column_int(0));
  }
  if (Status s = load_channels(); !s.ok()) return s;
  for (const ChannelChange& c : req_.changes)
    if (Status s = apply_change(c); !s.ok()) return s;
  for (Channel& ch : channels_) {
    if (const std::string why = ch.calibration.check(); !why.empty())
      return Status::error(SQLITE_MISUSE, "channel " + std::to_string(ch.channel) + ": calibration: " + why);
    if (Status s = resolve_calibration(ch, calibration_ids); !s.ok()) return s;
  }
  out.run_id = req_.run_id;
  out.parent = parent_;
  out.run_open = !run_ended_;
  return Status::success();
}

Status Job::load_channels() {
  Statement st;
  if (Status s = db_.prepare(
          "SELECT d.channel, d.calibration_id, COALESCE(d.settings, ''), COALESCE(d.start_state, ''), d.total,"
          " c.definition FROM derivation_channel d JOIN calibration c USING (calibration_id)"
          " WHERE d.run_id = ? AND d.derivation = ? ORDER BY d.channel",
          st);
      !s.ok())
    return s;
  st.bind(1, req_.run_id).bind(2, std::int64_t(parent_));
  for (bool row = true;;) {
    if (Status s = st.step(&row); !s.ok()) return s;
    if (!row) break;
    Channel ch;
    ch.channel = int(st.column_int(0));
    const std::string where = "run " + std::to_string(req_.run_id) + " derivation " + std::to_string(parent_) +
                              " channel " + std::to_string(ch.channel);
    ch.parent_definition = st.column_text(5);
    auto cal = calibration_from_definition(ch.parent_definition);
    if (!cal) return Status::error(SQLITE_CORRUPT, where + ": the stored calibration definition cannot be read");
    ch.calibration = *cal;
    ch.calibration.id = st.column_int(1);
    const std::string settings = st.column_text(2);
    if (settings.empty()) {
      // Recorded before derivations were: the chain's defaults at the run's sample period.
      settings_recorded_ = false;
      ch.settings.sample_period_s = sample_period_s_;
    } else {
      auto parsed = chain_settings_from_json(settings);
      if (!parsed) return Status::error(SQLITE_CORRUPT, where + ": the stored chain settings cannot be read");
      ch.settings = *parsed;
    }
    const std::string state = st.column_text(3);
    if (!state.empty()) {
      ch.start_state = chain_state_from_json(state);
      if (!ch.start_state) return Status::error(SQLITE_CORRUPT, where + ": the stored starting state cannot be read");
    }
    if (!st.column_is_null(4)) ch.parent_total = st.column_double(4);
    channels_.push_back(std::move(ch));
  }
  if (channels_.empty())
    return Status::error(SQLITE_NOTFOUND, "run " + std::to_string(req_.run_id) + " derivation " +
                                              std::to_string(parent_) + " records no channels to recompute");
  return Status::success();
}

bool positive(double v) { return std::isfinite(v) && v > 0; }

Status Job::apply_change(const ChannelChange& c) {
  bool matched = false;
  for (Channel& ch : channels_) {
    if (c.channel && *c.channel != ch.channel) continue;
    matched = true;
    const std::string where = "channel " + std::to_string(ch.channel) + ": ";
    auto& fe = ch.calibration.front_end;
    const auto set = [&](const char* key, double& field, std::optional<double> v, bool zero_ok) -> Status {
      if (!v) return Status::success();
      if (!(positive(*v) || (zero_ok && *v == 0.0)))
        return Status::error(SQLITE_MISUSE, where + key + " must be a positive number" + (zero_ok ? " or 0" : ""));
      ch.changed[key] = {{"from", field}, {"to", *v}};
      field = *v;
      return Status::success();
    };
    if (Status s = set("c_farad", fe.c_farad, c.c_farad, false); !s.ok()) return s;
    if (Status s = set("r1_ohm", fe.r1_ohm, c.r1_ohm, true); !s.ok()) return s;
    if (Status s = set("r2_ohm", fe.r2_ohm, c.r2_ohm, true); !s.ok()) return s;
    if (Status s = set("gain", ch.calibration.adc.gain, c.gain, false); !s.ok()) return s;
    if (c.zero_code) {
      ch.changed["zero_code"] = {{"from", ch.calibration.adc.zero_code}, {"to", *c.zero_code}};
      ch.calibration.adc.zero_code = *c.zero_code;
    }
    const std::string before = baseline_text(ch.settings);
    if (c.baseline_model) ch.settings.baseline_model = *c.baseline_model;
    if (c.baseline_robust) ch.settings.baseline_robust = *c.baseline_robust;
    if (baseline_text(ch.settings) != before) ch.changed["baseline"] = {{"from", before}, {"to", baseline_text(ch.settings)}};
    for (const auto& q : c.add_quiet_windows) {
      if (q.first_index > q.last_index) return Status::error(SQLITE_MISUSE, where + "a quiet window ends before it starts");
      ch.settings.quiet_windows.push_back(q);
      ch.changed["quiet_windows_added"].push_back({q.first_index, q.last_index});
    }
    for (const std::uint32_t ordinal : c.drop_baselines) {
      Statement st;
      if (Status s = db_.prepare("SELECT first_index, last_index FROM baseline WHERE run_id = ? AND derivation = ?"
                                 " AND channel = ? AND ordinal = ?",
                                 st);
          !s.ok())
        return s;
      st.bind(1, req_.run_id).bind(2, std::int64_t(parent_)).bind(3, std::int64_t(ch.channel)).bind(4, std::int64_t(ordinal));
      bool row = false;
      if (Status s = st.step(&row); !s.ok()) return s;
      if (!row)
        return Status::error(SQLITE_NOTFOUND, where + "derivation " + std::to_string(parent_) + " has no baseline " +
                                                  std::to_string(ordinal));
      const auto first = std::uint64_t(st.column_int(0)), last = std::uint64_t(st.column_int(1));
      // A baseline from a quiet window goes with its window; one from the zero relay
      // turns the relay's samples into dead time.
      auto& quiet = ch.settings.quiet_windows;
      auto q = std::find_if(quiet.begin(), quiet.end(),
                            [&](const auto& w) { return w.first_index <= first && last <= w.last_index; });
      if (q != quiet.end()) quiet.erase(q);
      else ch.dead_zero_windows.emplace_back(first, last);
      ch.changed["baselines_dropped"].push_back({{"ordinal", ordinal}, {"first_index", first}, {"last_index", last}});
    }
  }
  if (!matched)
    return Status::error(SQLITE_NOTFOUND, "run " + std::to_string(req_.run_id) + " has no channel " +
                                              std::to_string(c.channel.value_or(-1)));
  return Status::success();
}

Status Job::resolve_calibration(Channel& ch, const CalibrationIds& calibration_ids) {
  const std::string text = calibration_definition(ch.calibration);
  if (text == ch.parent_definition) return Status::success();  // the parent's version, id kept
  if (calibration_ids) return calibration_ids(ch.channel, ch.calibration);
  // Offline: the newest stored version with this definition, else a new one.
  Statement find;
  if (Status s = db_.prepare("SELECT calibration_id FROM calibration WHERE channel = ? AND definition = ?"
                             " ORDER BY calibration_id DESC LIMIT 1",
                             find);
      !s.ok())
    return s;
  find.bind(1, std::int64_t(ch.channel)).bind(2, text);
  bool row = false;
  if (Status s = find.step(&row); !s.ok()) return s;
  if (row) {
    ch.calibration.id = find.column_int(0);
    return Status::success();
  }
  if (Status s = db_.exec("BEGIN IMMEDIATE"); !s.ok()) return s;
  Statement next, insert;
  Status s = db_.prepare("SELECT COALESCE(MAX(calibration_id), 0) + 1 FROM calibration", next);
  if (s.ok()) s = next.step(&row);
  if (s.ok()) {
    ch.calibration.id = next.column_int(0);
    s = db_.prepare("INSERT INTO calibration(calibration_id, channel, created_utc, quantity, unit, quantity_per_volt,"
                    " definition) VALUES(?,?,?,?,?,?,?)",
                    insert);
  }
  if (s.ok()) {
    insert.bind(1, ch.calibration.id)
        .bind(2, std::int64_t(ch.channel))
        .bind(3, rfc3339_utc(clock_()))
        .bind(4, ch.calibration.quantity_name())
        .bind(5, ch.calibration.unit())
        .bind(6, ch.calibration.quantity_per_volt())
        .bind(7, text);
    s = insert.run();
  }
  if (s.ok()) s = db_.exec("COMMIT");
  if (!s.ok()) (void)db_.exec("ROLLBACK");  // the statement's error is the one to report
  return s;
}

Status Job::create_derivation(ReprocessResult& out) {
  json changes = {{"parent", parent_}, {"channels", json::object()}};
  for (const Channel& ch : channels_) {
    json c = ch.changed;
    c["calibration_id"] = ch.calibration.id;
    changes["channels"][std::to_string(ch.channel)] = c;
  }
  if (!settings_recorded_) changes["note"] = "the parent's chain settings were not recorded: the chain's defaults were used";
  out.changes = changes.dump();
  if (Status s = db_.exec("BEGIN IMMEDIATE"); !s.ok()) return s;
  std::int64_t next = 1;
  bool found = false;
  Status s = one_value("SELECT MAX(derivation) + 1 FROM derivation WHERE run_id = ?", next, found);
  Statement d, c;
  if (s.ok()) {
    derivation_ = found ? int(next) : 1;
    s = db_.prepare("INSERT INTO derivation(run_id, derivation, parent, created_utc, who, reason, changes, state)"
                    " VALUES(?,?,?,?,?,?,?, 'running')",
                    d);
  }
  if (s.ok()) {
    d.bind(1, req_.run_id)
        .bind(2, std::int64_t(derivation_))
        .bind(3, std::int64_t(parent_))
        .bind(4, rfc3339_utc(clock_()))
        .bind(5, req_.who)
        .bind(6, req_.reason)
        .bind(7, out.changes);
    s = d.run();
  }
  if (s.ok())
    s = db_.prepare("INSERT INTO derivation_channel(run_id, derivation, channel, calibration_id, baseline, settings,"
                    " start_state) VALUES(?,?,?,?,?,?,?)",
                    c);
  for (const Channel& ch : channels_) {
    if (!s.ok()) break;
    c.bind(1, req_.run_id)
        .bind(2, std::int64_t(derivation_))
        .bind(3, std::int64_t(ch.channel))
        .bind(4, ch.calibration.id)
        .bind(5, baseline_text(ch.settings))
        .bind(6, chain_settings_to_json(ch.settings));
    if (ch.start_state) c.bind(7, chain_state_to_json(*ch.start_state));
    else c.bind_null(7);
    s = c.run();
  }
  if (s.ok()) s = db_.exec("COMMIT");
  if (!s.ok()) {
    (void)db_.exec("ROLLBACK");
    return s;
  }
  out.derivation = derivation_;
  return Status::success();
}

Status Job::write_channel(Channel& ch) {
  const std::int64_t run = req_.run_id, der = derivation_, c = ch.channel, cal = ch.calibration.id;
  for (const auto& p : ch.out.series) {
    series_.bind(1, run).bind(2, der).bind(3, c).bind(4, std::int64_t(p.first_index)).bind(5, std::int64_t(p.samples));
    series_.bind(6, p.min_v).bind(7, p.max_v).bind(8, p.mean_v).bind(9, p.last_v).bind(10, p.total).bind(11, p.total_u);
    series_.bind(12, cal);
    if (Status s = series_.run(); !s.ok()) return s;
  }
  if (!ch.out.series.empty()) {
    for (const rollup::Bucket& k : rollup::fold_points(ch.out.series, sample_period_s_)) {
      rollup_.bind(1, run).bind(2, der).bind(3, c).bind(4, k.width_s).bind(5, std::int64_t(k.bucket));
      rollup_.bind(6, std::int64_t(k.first_index)).bind(7, std::int64_t(k.last_point_index)).bind(8, std::int64_t(k.points));
      rollup_.bind(9, std::int64_t(k.samples)).bind(10, k.min_v).bind(11, k.max_v).bind(12, k.sum_v).bind(13, k.last_v);
      rollup_.bind(14, k.total).bind(15, k.total_u).bind(16, cal);
      if (Status s = rollup_.run(); !s.ok()) return s;
    }
  }
  for (const auto& g : ch.out.baselines) {
    baseline_.bind(1, run).bind(2, der).bind(3, c).bind(4, std::int64_t(g.ordinal)).bind(5, std::int64_t(g.first_index));
    baseline_.bind(6, std::int64_t(g.last_index)).bind(7, std::int64_t(g.samples)).bind(8, g.intercept_v);
    baseline_.bind(9, g.slope_v_per_s).bind(10, g.slope_se_v_per_s).bind(11, g.residual_rms_v);
    if (Status s = baseline_.run(); !s.ok()) return s;
  }
  for (const auto& g : ch.out.segments) {
    segment_.bind(1, run).bind(2, der).bind(3, c).bind(4, std::int64_t(g.ordinal)).bind(5, std::int64_t(g.first_index));
    segment_.bind(6, std::int64_t(g.last_index)).bind(7, g.start_v).bind(8, g.end_v).bind(9, g.drift_v);
    segment_.bind(10, g.gap_before_v).bind(11, g.gap_before_u_v).bind(12, g.end_points_u_v).bind(13, g.quantity);
    segment_.bind(14, std::int64_t(g.baseline_ordinal)).bind(15, std::int64_t(g.flags)).bind(16, g.total_after);
    segment_.bind(17, g.total_u_after).bind(18, cal);
    if (Status s = segment_.run(); !s.ok()) return s;
  }
  ch.out.clear();
  return Status::success();
}

Status Job::write_outputs() {
  if (Status s = db_.exec("BEGIN IMMEDIATE"); !s.ok()) return s;
  Status s = Status::success();
  for (Channel& ch : channels_) {
    if (s = write_channel(ch); !s.ok()) break;
  }
  if (s.ok()) s = db_.exec("COMMIT");
  if (!s.ok()) (void)db_.exec("ROLLBACK");
  return s;
}

Status Job::recompute(const ReprocessProgressFn& progress, ReprocessResult& out) {
  struct Item {
    Statement* st;
    const char* sql;
  } items[] = {
      {&series_,
       "INSERT OR REPLACE INTO series_point(run_id, derivation, channel, first_index, samples, min_v, max_v, mean_v,"
       " last_v, total, total_u, calibration_id) VALUES(?,?,?,?,?,?,?,?,?,?,?,?)"},
      {&rollup_,
       "INSERT INTO rollup(run_id, derivation, channel, width_s, bucket, first_index, last_point_index, points, samples,"
       " min_v, max_v, sum_v, last_v, total, total_u, calibration_id) VALUES(?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?)"
       " ON CONFLICT(run_id, derivation, channel, width_s, bucket) DO UPDATE SET"
       " last_point_index = excluded.last_point_index, points = points + excluded.points,"
       " samples = samples + excluded.samples, min_v = min(min_v, excluded.min_v), max_v = max(max_v, excluded.max_v),"
       " sum_v = sum_v + excluded.sum_v, last_v = excluded.last_v, total = excluded.total, total_u = excluded.total_u"
       " WHERE excluded.first_index > rollup.last_point_index"},
      {&baseline_,
       "INSERT OR REPLACE INTO baseline(run_id, derivation, channel, ordinal, first_index, last_index, samples,"
       " intercept_v, slope_v_per_s, slope_se_v_per_s, residual_rms_v) VALUES(?,?,?,?,?,?,?,?,?,?,?)"},
      {&segment_,
       "INSERT OR REPLACE INTO segment(run_id, derivation, channel, ordinal, first_index, last_index, start_v, end_v,"
       " drift_v, gap_before_v, gap_before_u_v, end_points_u_v, quantity, baseline_ordinal, flags, total_after,"
       " total_u_after, calibration_id) VALUES(?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?)"},
  };
  for (auto& item : items)
    if (Status s = db_.prepare(item.sql, *item.st); !s.ok()) return s;

  for (Channel& ch : channels_) {
    ch.chain = std::make_unique<chain::ChannelChain>(ch.calibration, ch.settings);
    // The run began from a carried total: the daemon's chain was resumed from it (and settles first).
    if (ch.start_state) ch.chain->resume(*ch.start_state);
  }
  // Where the daemon restarted within the run: it resumed every chain from its last committed state there.
  std::vector<std::uint64_t> resumes;
  {
    Statement st;
    if (Status s = db_.prepare("SELECT sample_index FROM event WHERE run_id = ? AND kind = 'run_resumed'"
                               " AND sample_index IS NOT NULL ORDER BY sample_index",
                               st);
        !s.ok())
      return s;
    st.bind(1, req_.run_id);
    for (bool row = true;;) {
      if (Status s = st.step(&row); !s.ok()) return s;
      if (!row) break;
      resumes.push_back(std::uint64_t(st.column_int(0)));
    }
  }
  ReprocessProgress p;
  p.run_id = req_.run_id;
  p.derivation = derivation_;
  {
    Statement st;
    if (Status s = db_.prepare("SELECT COUNT(*), COALESCE(SUM(samples), 0) FROM raw_block WHERE run_id = ?", st); !s.ok())
      return s;
    st.bind(1, req_.run_id);
    bool row = false;
    if (Status s = st.step(&row); !s.ok()) return s;
    p.blocks_total = std::uint64_t(st.column_int(0));
    p.samples_total = std::uint64_t(st.column_int(1));
  }
  if (p.blocks_total == 0)
    return Status::error(SQLITE_NOTFOUND, "run " + std::to_string(req_.run_id) +
                                              " has no raw blocks stored (past raw retention, or raw writing stopped):"
                                              " there is nothing to recompute from");
  if (progress && !progress(p)) return Status::error(SQLITE_INTERRUPT, "cancelled");

  Statement blocks;
  if (Status s = db_.prepare("SELECT first_index, channel_count, samples, status, encoding, data FROM raw_block"
                             " WHERE run_id = ?1 AND first_index > ?2 ORDER BY first_index LIMIT ?3",
                             blocks);
      !s.ok())
    return s;
  std::int64_t after = -1;
  std::optional<std::uint64_t> expected;
  std::size_t next_resume = 0;
  std::vector<std::int32_t> codes;
  namespace bit = protocol::status_bit;
  for (;;) {
    blocks.bind(1, req_.run_id).bind(2, after).bind(3, std::int64_t(std::max<std::size_t>(1, req_.blocks_per_transaction)));
    std::size_t read = 0;
    for (bool row = true;;) {
      if (Status s = blocks.step(&row); !s.ok()) return s;
      if (!row) break;
      ++read;
      const auto first = std::uint64_t(blocks.column_int(0));
      const int channel_count = int(blocks.column_int(1));
      const auto samples = std::size_t(blocks.column_int(2));
      const auto status = std::uint8_t(blocks.column_int(3));
      const auto* data = static_cast<const std::uint8_t*>(sqlite3_column_blob(blocks.raw(), 5));
      const auto size = std::size_t(sqlite3_column_bytes(blocks.raw(), 5));
      after = std::int64_t(first);
      if (Status s = block_codec::decode(int(blocks.column_int(4)), std::span<const std::uint8_t>(data, size),
                                         channel_count, std::size_t(channel_count) * samples, codes);
          !s.ok())
        return Status::error(s.code, "run " + std::to_string(req_.run_id) + " block at " + std::to_string(first) + ": " +
                                         s.message);
      if (channel_count <= channels_.back().channel)
        return Status::error(SQLITE_CORRUPT, "run " + std::to_string(req_.run_id) + " block at " + std::to_string(first) +
                                                 " has " + std::to_string(channel_count) + " channel(s); the derivation has " +
                                                 std::to_string(channels_.back().channel + 1));
      // A daemon restart: its chains started again from the state committed last, which is the
      // state here (the checkpoint went in with the blocks before), and the open segment it had
      // stored provisionally stayed as it was.
      bool resumed = false;
      for (; next_resume < resumes.size() && resumes[next_resume] <= first; ++next_resume) {
        if (!expected) continue;
        resumed = true;
        ++out.resumes;
        for (Channel& ch : channels_) {
          const chain::TotalSnapshot t = ch.chain->snapshot();
          if (t.open_segment) ch.out.segments.push_back(*t.open_segment);
          ch.chain = std::make_unique<chain::ChannelChain>(ch.calibration, ch.settings);
          ch.chain->resume(t.state);
        }
      }
      if (expected && first > *expected && !resumed) {
        // Samples missing between stored blocks (lost on the wire, as the daemon saw them, or raw
        // blocks not stored): the chain ends the open segment there, as the daemon's ingest does.
        ++out.index_gaps;
        out.gap_samples += first - *expected;
        for (Channel& ch : channels_) ch.chain->on_missing_samples(ch.out);
      }
      const std::uint64_t last = first + samples - (samples ? 1 : 0);
      for (Channel& ch : channels_) {
        std::uint8_t st = status;
        if (st & bit::zero_relay) {
          for (const auto& [lo, hi] : ch.dead_zero_windows)
            if (first <= hi && last >= lo) st = std::uint8_t((st & ~bit::zero_relay) | bit::reset_active);
        }
        ch.chain->process(first, st, codes.data() + ch.channel, samples, std::size_t(channel_count), ch.out);
        ch.out.events.clear();  // the live run logged its events; a derivation does not repeat them
      }
      expected = first + samples;
      ++p.blocks_done;
      p.samples_done += samples;
      ++out.blocks;
      out.samples += samples;
    }
    blocks.reset();
    if (read == 0) break;
    if (Status s = write_outputs(); !s.ok()) return s;
    if (progress && !progress(p)) return Status::error(SQLITE_INTERRUPT, "cancelled");
  }
  return finish(out);
}

Status Job::finish(ReprocessResult& out) {
  for (Channel& ch : channels_) {
    // As the daemon does: an ended run closes its chains; an open one keeps its open
    // segment as a provisional row, up to the last sample stored.
    if (run_ended_) {
      ch.chain->finish(ch.out);
    } else if (auto t = ch.chain->snapshot(); t.open_segment) {
      ch.out.segments.push_back(*t.open_segment);
    }
    ch.out.events.clear();
  }
  if (Status s = db_.exec("BEGIN IMMEDIATE"); !s.ok()) return s;
  Status s = Status::success();
  for (Channel& ch : channels_)
    if (s.ok()) s = write_channel(ch);
  Statement total, done;
  if (s.ok())
    s = db_.prepare("UPDATE derivation_channel SET last_index = ?, total = ?, std_uncertainty = ?, segments = ?,"
                    " flags = ? WHERE run_id = ? AND derivation = ? AND channel = ?",
                    total);
  for (Channel& ch : channels_) {
    if (!s.ok()) break;
    const chain::TotalSnapshot t = ch.chain->snapshot();
    total.bind(1, std::int64_t(t.last_index)).bind(2, t.total).bind(3, t.std_uncertainty);
    total.bind(4, std::int64_t(t.segments)).bind(5, std::int64_t(t.flags)).bind(6, req_.run_id);
    total.bind(7, std::int64_t(derivation_)).bind(8, std::int64_t(ch.channel));
    s = total.run();
    ReprocessChannelResult r;
    r.channel = ch.channel;
    r.calibration_id = ch.calibration.id;
    r.quantity = ch.calibration.quantity_name();
    r.unit = ch.calibration.unit();
    r.baseline = baseline_text(ch.settings);
    r.total = t.total;
    r.std_uncertainty = t.std_uncertainty;
    r.segments = t.segments;
    r.flags = t.flags;
    r.last_index = t.last_index;
    r.parent_total = ch.parent_total;
    out.channels.push_back(r);
  }
  json changes = json::parse(out.changes);
  changes["raw_blocks"] = out.blocks;
  if (out.index_gaps) changes["raw_index_gaps"] = {{"count", out.index_gaps}, {"samples", out.gap_samples}};
  if (out.resumes) changes["daemon_restarts_replayed"] = out.resumes;
  if (!run_ended_) changes["run_open"] = "the run had not ended; this derivation covers it up to its last stored block";
  out.changes = changes.dump();
  if (s.ok())
    s = db_.prepare("UPDATE derivation SET state = 'complete', finished_utc = ?, changes = ? WHERE run_id = ?"
                    " AND derivation = ?",
                    done);
  if (s.ok()) {
    done.bind(1, rfc3339_utc(clock_())).bind(2, out.changes).bind(3, req_.run_id).bind(4, std::int64_t(derivation_));
    s = done.run();
  }
  if (s.ok()) s = db_.exec("COMMIT");
  if (!s.ok()) (void)db_.exec("ROLLBACK");
  return s;
}

void Job::mark_failed(const std::string& why) {
  if (derivation_ == 0) return;
  // Best effort: the derivation was never readable ("running"), so a failure here leaves nothing wrong to read.
  if (!db_.exec("BEGIN IMMEDIATE").ok()) return;
  Status s = Status::success();
  for (const char* table : {"series_point", "rollup", "baseline", "segment"}) {
    Statement del;
    if (s.ok()) s = db_.prepare(std::string("DELETE FROM ") + table + " WHERE run_id = ? AND derivation = ?", del);
    if (s.ok()) {
      del.bind(1, req_.run_id).bind(2, std::int64_t(derivation_));
      s = del.run();
    }
  }
  Statement upd;
  if (s.ok())
    s = db_.prepare("UPDATE derivation SET state = 'failed', finished_utc = ?, changes = json_set(changes, '$.error', ?)"
                    " WHERE run_id = ? AND derivation = ?",
                    upd);
  if (s.ok()) {
    upd.bind(1, rfc3339_utc(clock_())).bind(2, why).bind(3, req_.run_id).bind(4, std::int64_t(derivation_));
    s = upd.run();
  }
  if (s.ok()) s = db_.exec("COMMIT");
  if (!s.ok()) (void)db_.exec("ROLLBACK");
}

}  // namespace

Status reprocess(const std::string& path, const ReprocessRequest& request, const std::function<double()>& clock,
                 const ReprocessProgressFn& progress, ReprocessResult& out, const CalibrationIds& calibration_ids) {
  out = ReprocessResult{};
  std::error_code ec;
  if (!std::filesystem::is_regular_file(path, ec))
    return Status::error(SQLITE_CANTOPEN, "no database file at " + path);
  std::unique_ptr<Database> db;
  if (Status s = Database::open(path, Database::Mode::read_write_create, db); !s.ok()) return s;
  int version = 0;
  if (Status s = check_schema_version(*db, version); !s.ok()) return s;
  if (Status s = configure_writer_connection(*db); !s.ok()) return s;
  if (Status s = migrate(*db); !s.ok()) return s;
  Job job(*db, request, clock);
  if (Status s = job.prepare(out, calibration_ids); !s.ok()) return s;
  if (Status s = job.create_derivation(out); !s.ok()) return s;
  if (Status s = job.recompute(progress, out); !s.ok()) {
    job.mark_failed(s.message);
    return s;
  }
  return Status::success();
}

}  // namespace accrue::storage
