#include "tools/accrue/plan_from_db.hpp"

#include <sqlite3.h>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <memory>
#include <sstream>

#include "daemon/chain/records.hpp"
#include "tools/accrue/plan_report.hpp"

namespace accrue::client {
namespace {

struct DbCloser {
  void operator()(sqlite3* db) const { sqlite3_close(db); }
};
struct StmtCloser {
  void operator()(sqlite3_stmt* s) const { sqlite3_finalize(s); }
};
using Db = std::unique_ptr<sqlite3, DbCloser>;
using Stmt = std::unique_ptr<sqlite3_stmt, StmtCloser>;

// Prepares `sql` and binds run and channel to ?1 and ?2 where present.
bool prepare(sqlite3* db, const char* sql, std::int64_t run, int channel, Stmt& out, std::string& error) {
  sqlite3_stmt* s = nullptr;
  if (sqlite3_prepare_v2(db, sql, -1, &s, nullptr) != SQLITE_OK) {
    error = std::string("cannot read the database: ") + sqlite3_errmsg(db);
    return false;
  }
  out.reset(s);
  const int params = sqlite3_bind_parameter_count(s);
  if ((params >= 1 && sqlite3_bind_int64(s, 1, run) != SQLITE_OK) ||
      (params >= 2 && sqlite3_bind_int(s, 2, channel) != SQLITE_OK)) {
    error = std::string("cannot bind a query parameter: ") + sqlite3_errmsg(db);
    return false;
  }
  return true;
}

// Steps through every row, calling `row` on each; false (with `error`) on a failure.
template <class F>
bool each_row(sqlite3* db, sqlite3_stmt* s, std::string& error, F row) {
  for (;;) {
    const int rc = sqlite3_step(s);
    if (rc == SQLITE_DONE) return true;
    if (rc != SQLITE_ROW) {
      error = std::string("cannot read the database: ") + sqlite3_errmsg(db);
      return false;
    }
    row(s);
  }
}

std::string num(double v, int digits = 4) {
  char buf[64];
  std::snprintf(buf, sizeof buf, "%.*g", digits, v);
  return buf;
}

}  // namespace

DbResult read_recorded_run(const std::string& path, std::int64_t run_id, int channel) {
  DbResult r;
  sqlite3* raw = nullptr;
  const int rc = sqlite3_open_v2(path.c_str(), &raw, SQLITE_OPEN_READONLY, nullptr);
  Db db(raw);
  if (rc != SQLITE_OK) {
    r.error = "cannot open " + path + ": " + (raw ? sqlite3_errmsg(raw) : "out of memory");
    return r;
  }
  std::string& e = r.error;
  Stmt s;
  // The run and its clock.
  const char* run_sql = run_id > 0 ? "SELECT run_id, sample_period_s FROM run WHERE run_id = ?1"
                                   : "SELECT run_id, sample_period_s FROM run ORDER BY run_id DESC LIMIT 1";
  if (!prepare(db.get(), run_sql, run_id, channel, s, e)) return r;
  bool found = false;
  if (!each_row(db.get(), s.get(), e, [&](sqlite3_stmt* st) {
        found = true;
        r.run.run_id = sqlite3_column_int64(st, 0);
        r.run.sample_period_s = sqlite3_column_double(st, 1);
      }))
    return r;
  if (!found) {
    e = run_id > 0 ? "no run " + std::to_string(run_id) + " in " + path : "no run recorded in " + path;
    return r;
  }
  RecordedRun& run = r.run;
  run.channel = channel;
  const std::int64_t id = run.run_id;

  std::vector<double> slopes;
  if (!prepare(db.get(), "SELECT slope_v_per_s FROM baseline WHERE run_id = ?1 AND channel = ?2"
               " AND derivation = (SELECT derivation FROM derivation_newest WHERE run_id = ?1) ORDER BY ordinal", id,
               channel, s, e) ||
      !each_row(db.get(), s.get(), e, [&](sqlite3_stmt* st) { slopes.push_back(sqlite3_column_double(st, 0)); }))
    return r;
  run.baselines = slopes.size();
  if (!slopes.empty()) {
    double sum = 0;
    for (double v : slopes) sum += v;
    run.drift_mean_v_per_s = sum / double(slopes.size());
    run.drift_min_v_per_s = *std::min_element(slopes.begin(), slopes.end());
    run.drift_max_v_per_s = *std::max_element(slopes.begin(), slopes.end());
  }

  std::vector<double> starts;
  std::int64_t first = -1, last = -1;
  double live_samples = 0;
  if (!prepare(db.get(),
               "SELECT ordinal, first_index, last_index, start_v, quantity, flags, end_v FROM segment "
               "WHERE run_id = ?1 AND channel = ?2"
               " AND derivation = (SELECT derivation FROM derivation_newest WHERE run_id = ?1) ORDER BY ordinal",
               id, channel, s, e) ||
      !each_row(db.get(), s.get(), e, [&](sqlite3_stmt* st) {
        ++run.segments;
        const std::int64_t a = sqlite3_column_int64(st, 1), b = sqlite3_column_int64(st, 2);
        if (first < 0) first = a;
        last = b;
        live_samples += double(b - a);
        if (sqlite3_column_int64(st, 0) >= 2) starts.push_back(sqlite3_column_double(st, 3));
        run.quantity_total += sqlite3_column_double(st, 4);
        run.output_change_v += sqlite3_column_double(st, 6) - sqlite3_column_double(st, 3);
        if (sqlite3_column_int64(st, 5) & chain::segment_flag::clipped) ++run.clipped_segments;
      }))
    return r;
  if (first >= 0) run.duration_s = double(last - first) * run.sample_period_s;
  run.live_s = live_samples * run.sample_period_s;
  if (!starts.empty()) {
    std::sort(starts.begin(), starts.end());
    const std::size_t n = starts.size();
    run.start_v_median = n % 2 ? starts[n / 2] : 0.5 * (starts[n / 2 - 1] + starts[n / 2]);
  }

  if (!prepare(db.get(),
               "SELECT kind, COUNT(*) FROM event WHERE run_id = ?1 AND (channel = ?2 OR channel IS NULL) GROUP BY kind",
               id, channel, s, e) ||
      !each_row(db.get(), s.get(), e, [&](sqlite3_stmt* st) {
        const auto* k = reinterpret_cast<const char*>(sqlite3_column_text(st, 0));
        const std::string kind = k ? k : "";
        const auto count = std::size_t(sqlite3_column_int64(st, 1));
        if (kind == "board_reset_begin") run.reset_events = count;
        else if (kind == "board_overload") run.overload_events = count;
        else if (kind == "board_zero_relay_closed") run.zero_windows = count;
      }))
    return r;
  return r;
}

Comparison compare_with_plan(const PlanInput& in, const Plan& p, const RecordedRun& r) {
  Comparison c;
  nlohmann::json j;
  std::ostringstream o;
  std::vector<std::pair<std::string, std::string>> findings;
  j["run_id"] = r.run_id;
  j["channel"] = r.channel;
  j["duration_s"] = r.duration_s;
  o << "recorded run " << r.run_id << ", channel " << r.channel << ": " << si_text(r.duration_s, "s") << " in "
    << r.segments << " segments\n";

  // Drift: the plan's figure is a worst-case bound from the parts' ratings.
  j["baselines"] = r.baselines;
  j["measured_drift_v_per_s"] = r.drift_mean_v_per_s;
  j["measured_drift_min_v_per_s"] = r.drift_min_v_per_s;
  j["measured_drift_max_v_per_s"] = r.drift_max_v_per_s;
  j["planned_drift_v_per_s"] = p.drift_v_per_s;
  const double drift_ratio = p.drift_v_per_s > 0 ? std::fabs(r.drift_mean_v_per_s) / p.drift_v_per_s : 0.0;
  j["drift_ratio"] = drift_ratio;
  if (r.baselines == 0) {
    o << "  drift                 no baseline recorded (no zero window)\n";
    findings.push_back({"no_baseline", "no zero window in the run: the drift was not measured"});
  } else {
    o << "  drift                 measured " << si_text(r.drift_mean_v_per_s, "V/s") << " (" << r.baselines
      << " fits), planned at most " << si_text(p.drift_v_per_s, "V/s") << ": " << num(100 * drift_ratio, 3)
      << " % of the plan\n";
    if (std::fabs(r.drift_max_v_per_s) > 1.1 * p.drift_v_per_s &&
        std::fabs(r.drift_max_v_per_s) - p.drift_v_per_s > 3 * p.drift_slope_se_v_per_s)
      findings.push_back({"drift_above_plan", "the measured drift exceeds the offset and bias the plan assumed"});
  }

  // Segment start: offset plus pedestal, give or take what the input adds in the settle time.
  const double settle_v = p.rate_max_v_per_s * in.settle_s;
  const double start_lo = std::max(0.0, p.start_v - settle_v), start_hi = p.start_v + settle_v;
  const double slack = std::max(0.2 * p.start_v, 5 * p.reading_sigma_v);
  j["measured_start_v_median"] = r.start_v_median;
  j["planned_start_v_low"] = start_lo;
  j["planned_start_v_high"] = start_hi;
  if (r.segments >= 2) {
    o << "  segment start         median " << si_text(r.start_v_median, "V") << ", planned " << si_text(start_lo, "V")
      << " .. " << si_text(start_hi, "V") << " (offset + pedestal, +- settle)\n";
    if (std::fabs(r.start_v_median) < start_lo - slack || std::fabs(r.start_v_median) > start_hi + slack)
      findings.push_back({"pedestal_differs", "segments start away from the planned offset plus pedestal"});
  }

  // Saturation: the plan predicts none unless it warned.
  j["clipped_segments"] = r.clipped_segments;
  j["overload_events"] = r.overload_events;
  o << "  saturation            " << r.clipped_segments << " clipped segments, " << r.overload_events
    << " overload events (plan: none)\n";
  if (r.clipped_segments || r.overload_events)
    findings.push_back({"saturated", "the output saturated: those segments are lower bounds"});

  // Resets, two ways. The plan's range (minimum to maximum input) scaled to
  // the recorded length says whether the input stayed within what was planned;
  // the count the plan's threshold gives at the run's own mean output slope
  // says whether the board reset where the plan put the threshold.
  const double scale = in.duration_s > 0 ? r.duration_s / in.duration_s : 0.0;
  const double range_lo = p.resets_max < p.resets_min ? p.resets_max * scale : p.resets_min * scale;
  const double range_hi = std::max(p.resets_max, p.resets_min) * scale;
  const double slope = r.live_s > 0 ? std::fabs(r.output_change_v) / r.live_s : 0.0;
  const double climb_v = p.threshold_v - p.start_v;
  const double at_slope = slope > 0 && climb_v > 0 ? r.duration_s / (climb_v / slope + p.dead_per_reset_s) : 0.0;
  const std::size_t resets = r.segments > 0 ? r.segments - 1 : 0;
  j["reset_events"] = r.reset_events;
  j["resets"] = resets;
  j["planned_resets_low"] = range_lo;
  j["planned_resets_high"] = range_hi;
  j["mean_output_slope_v_per_s"] = slope;
  j["resets_at_mean_slope"] = at_slope;
  o << "  resets                " << resets << " (" << r.reset_events << " reset events); plan " << num(range_lo, 4)
    << " .. " << num(range_hi, 4) << " over this length; " << num(at_slope, 4) << " at the run's mean slope "
    << si_text(slope, "V/s") << " and the " << si_text(p.threshold_v, "V") << " threshold\n";
  // A reset count is whole: allow one either side.
  if (double(resets) < std::floor(range_lo) - 1.0 || double(resets) > std::ceil(range_hi) + 1.0)
    findings.push_back({"resets_outside_plan", "more or fewer resets than the planned input range allows"});
  // The input is not steady within a run: allow one reset and 15 %.
  if (std::fabs(double(resets) - at_slope) > 1.0 + 0.15 * at_slope)
    findings.push_back({"resets_differ", "the board does not reset at the plan's threshold"});

  nlohmann::json f = nlohmann::json::array();
  for (const auto& [code, text] : findings) f.push_back({{"code", code}, {"text", text}});
  j["findings"] = f;
  c.within_plan = findings.empty();
  j["within_plan"] = c.within_plan;
  if (findings.empty()) o << "  the run behaved as planned\n";
  for (const auto& [code, text] : findings) o << "  finding " << code << ": " << text << "\n";
  c.json = j;
  c.text = o.str();
  return c;
}

}  // namespace accrue::client
