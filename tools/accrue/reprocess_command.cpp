// accrue reprocess: recompute stored runs with a corrected calibration or
// baseline as new derivations, through the daemon (JSON-RPC method
// "reprocess", progress as notifications) or, with --database, directly on a
// file no daemon is writing (storage::reprocess). Progress is one line on a
// terminal (stderr), rewritten in place; nothing when stderr is not one.
#include "tools/accrue/reprocess_command.hpp"

#include <unistd.h>

#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <ctime>
#include <iostream>

#include <nlohmann/json.hpp>

#include "storage/chain_settings_json.hpp"
#include "storage/reader.hpp"
#include "storage/reprocess.hpp"
#include "storage/utc.hpp"
#include "tools/accrue/commands.hpp"
#include "tools/accrue/eng_notation.hpp"
#include "tools/accrue/rpc_client.hpp"

namespace accrue::client {

using nlohmann::json;

namespace {

constexpr const char* kHelp = R"(usage: accrue reprocess (--run ID | --from T --to T) [changes] [options]

Recomputes a stored run from its raw blocks through the daemon's chain and
stores the result as a new derivation beside the original (never over it);
queries then read the newest derivation unless they name one.

which runs
  --run ID            the run (see accrue runs)
  --from T --to T     every run overlapping this span (RFC 3339 or Unix
                      seconds); each is recomputed whole, since a total
                      depends on everything before it in its run
  --parent N          start from derivation N (default: the newest)

changes (apply to every channel, or to the one named by --channel before them)
  --channel N         the following changes are for channel N
  --c VALUE           feedback capacitor, e.g. 1.02n (farad)
  --r1 VALUE          input resistor (ohm)
  --r2 VALUE          discharge resistor across C (ohm, 0: none)
  --gain VALUE        gain between integrator output and ADC
  --zero-code N       ADC code of 0 V
  --baseline MODEL    linear or quadratic drift fit
  --robust FIT        none or huber (a robust fit that ignores glitches)
  --quiet FROM:TO     a span known to be quiet (input at zero), as sample
                      indices or RFC 3339 times; fitted as a baseline
  --drop-baseline N   do not use baseline N (e.g. a zero window spoiled by a
                      glitch); the baseline before it stays in force

provenance
  --who NAME          who asks (default: $USER)
  --reason TEXT       why (stored with the derivation)

where
  --database FILE     work on FILE directly, without a daemon (only for a
                      file no daemon is writing); otherwise the daemon on
                      --socket does it and reports progress
)";

struct Args {
  std::optional<std::int64_t> run;
  std::optional<std::string> from, to;
  std::optional<int> parent;
  std::vector<storage::ChannelChange> changes;
  std::vector<std::string> quiet_texts;  // parallel to changes' quiet windows, resolved per run
  std::string who, reason, database;
};

bool number_arg(const std::string& name, const std::string& text, std::string_view unit, double& out) {
  const EngValue v = parse_engineering(text, unit);
  if (!v.ok) {
    std::fprintf(stderr, "accrue reprocess: %s: %s\n", name.c_str(), v.error.c_str());
    return false;
  }
  out = v.value;
  return true;
}

bool whole_arg(const std::string& name, const std::string& text, long long min, long long& out) {
  char* end = nullptr;
  out = std::strtoll(text.c_str(), &end, 10);
  if (text.empty() || *end != '\0' || out < min) {
    std::fprintf(stderr, "accrue reprocess: %s must be a whole number >= %lld, not %s\n", name.c_str(), min, text.c_str());
    return false;
  }
  return true;
}

// 0: parsed; 2: bad usage (message printed).
int parse(const std::vector<std::string>& args, Args& a) {
  storage::ChannelChange* current = nullptr;
  const auto change = [&]() -> storage::ChannelChange& {
    if (!current) {
      a.changes.emplace_back();
      current = &a.changes.back();
    }
    return *current;
  };
  for (std::size_t i = 0; i < args.size(); ++i) {
    const std::string& k = args[i];
    if (k == "--help" || k == "-h") {
      std::fputs(kHelp, stdout);
      std::exit(0);
    }
    if (i + 1 >= args.size()) {
      std::fprintf(stderr, "accrue reprocess: %s needs a value (see accrue reprocess --help)\n", k.c_str());
      return 2;
    }
    const std::string v = args[++i];
    long long n = 0;
    double x = 0;
    if (k == "--run") {
      if (!whole_arg(k, v, 1, n)) return 2;
      a.run = n;
    } else if (k == "--from") {
      a.from = v;
    } else if (k == "--to") {
      a.to = v;
    } else if (k == "--parent") {
      if (!whole_arg(k, v, 1, n)) return 2;
      a.parent = int(n);
    } else if (k == "--channel") {
      if (!whole_arg(k, v, 0, n) || n > 254) return 2;
      a.changes.emplace_back();
      current = &a.changes.back();
      current->channel = int(n);
    } else if (k == "--c") {
      if (!number_arg(k, v, "F", x)) return 2;
      change().c_farad = x;
    } else if (k == "--r1") {
      if (!number_arg(k, v, "ohm", x)) return 2;
      change().r1_ohm = x;
    } else if (k == "--r2") {
      if (!number_arg(k, v, "ohm", x)) return 2;
      change().r2_ohm = x;
    } else if (k == "--gain") {
      if (!number_arg(k, v, "", x)) return 2;
      change().gain = x;
    } else if (k == "--zero-code") {
      char* end = nullptr;
      const long long z = std::strtoll(v.c_str(), &end, 10);
      if (v.empty() || *end != '\0') {
        std::fprintf(stderr, "accrue reprocess: --zero-code must be a whole number, not %s\n", v.c_str());
        return 2;
      }
      change().zero_code = std::int32_t(z);
    } else if (k == "--baseline") {
      chain::BaselineModel m;
      if (!storage::parse_baseline_model(v, m)) {
        std::fprintf(stderr, "accrue reprocess: --baseline must be linear or quadratic, not %s\n", v.c_str());
        return 2;
      }
      change().baseline_model = m;
    } else if (k == "--robust") {
      chain::BaselineRobust r;
      if (!storage::parse_baseline_robust(v, r)) {
        std::fprintf(stderr, "accrue reprocess: --robust must be none or huber, not %s\n", v.c_str());
        return 2;
      }
      change().baseline_robust = r;
    } else if (k == "--quiet") {
      // Kept as text until the run (and its clock) is known; a placeholder window is resolved then.
      change().add_quiet_windows.push_back({a.quiet_texts.size(), 0});
      a.quiet_texts.push_back(v);
    } else if (k == "--drop-baseline") {
      if (!whole_arg(k, v, 1, n)) return 2;
      change().drop_baselines.push_back(std::uint32_t(n));
    } else if (k == "--who") {
      a.who = v;
    } else if (k == "--reason") {
      a.reason = v;
    } else if (k == "--database") {
      a.database = v;
    } else {
      std::fprintf(stderr, "accrue reprocess: unknown option %s (see accrue reprocess --help)\n", k.c_str());
      return 2;
    }
  }
  if (!a.run && !(a.from && a.to)) {
    std::fprintf(stderr, "accrue reprocess: name a run (--run ID) or a span (--from T --to T)\n");
    return 2;
  }
  if (a.who.empty()) a.who = std::getenv("USER") ? std::getenv("USER") : "unknown";
  return 0;
}

std::optional<double> time_of(const std::string& text) {
  if (auto t = storage::parse_rfc3339(text)) return t;
  char* end = nullptr;
  const double v = std::strtod(text.c_str(), &end);
  if (!text.empty() && *end == '\0' && std::isfinite(v)) return v;
  return std::nullopt;
}

// A quiet span "FROM:TO" as sample indices of a run (times through its clock).
bool quiet_window(const std::string& text, const storage::RunInfo& run, chain::ChainSettings::QuietWindow& out) {
  // Split at the colon that separates two bounds: RFC 3339 times contain colons of their own,
  // so try every colon and take the first split where both sides parse.
  for (std::size_t at = text.find(':'); at != std::string::npos; at = text.find(':', at + 1)) {
    const std::string a = text.substr(0, at), b = text.substr(at + 1);
    const auto index = [&](const std::string& t, std::uint64_t& v) {
      char* end = nullptr;
      const unsigned long long n = std::strtoull(t.c_str(), &end, 10);
      if (!t.empty() && *end == '\0' && t.find_first_not_of("0123456789") == std::string::npos) return v = n, true;
      const auto when = storage::parse_rfc3339(t);
      if (!when || run.sample_period_s <= 0) return false;
      const double i = std::round((*when - run.utc_at_index0) / run.sample_period_s);
      v = i <= 0 ? 0 : std::uint64_t(i);
      return true;
    };
    if (index(a, out.first_index) && index(b, out.last_index) && out.first_index <= out.last_index) return true;
  }
  return false;
}

// The runs the arguments name: one, or every run overlapping [from, to].
bool select_runs(const Args& a, const std::vector<storage::RunInfo>& runs, std::vector<storage::RunInfo>& out) {
  if (a.run) {
    for (const auto& r : runs)
      if (r.run_id == *a.run) out.push_back(r);
    if (out.empty()) std::fprintf(stderr, "accrue reprocess: no run %lld\n", (long long)*a.run);
    return !out.empty();
  }
  const auto from = time_of(*a.from), to = time_of(*a.to);
  if (!from || !to || *from > *to) {
    std::fprintf(stderr, "accrue reprocess: --from and --to must be RFC 3339 or Unix seconds, from before to\n");
    return false;
  }
  for (const auto& r : runs) {
    const auto start = storage::parse_rfc3339(r.started_utc);
    const auto end = r.ended_utc.empty() ? std::optional<double>(1e300) : storage::parse_rfc3339(r.ended_utc);
    if (start && end && *start <= *to && *end >= *from) out.push_back(r);
  }
  if (out.empty()) std::fprintf(stderr, "accrue reprocess: no run overlaps %s .. %s\n", a.from->c_str(), a.to->c_str());
  return !out.empty();
}

bool resolve_quiet(const Args& a, const storage::RunInfo& run, std::vector<storage::ChannelChange>& changes) {
  changes = a.changes;
  for (auto& c : changes)
    for (auto& q : c.add_quiet_windows) {
      const std::string& text = a.quiet_texts[q.first_index];
      if (!quiet_window(text, run, q)) {
        std::fprintf(stderr, "accrue reprocess: --quiet %s: give FROM:TO as sample indices or RFC 3339 times\n", text.c_str());
        return false;
      }
    }
  return true;
}

// The progress line, on a terminal only; `done` ends it.
class ProgressLine {
 public:
  ProgressLine() : tty_(::isatty(STDERR_FILENO) == 1) {}
  void show(std::int64_t run, int derivation, std::uint64_t done, std::uint64_t total) {
    if (!tty_) return;
    const double pct = total ? 100.0 * double(done) / double(total) : 100.0;
    std::fprintf(stderr, "\rrun %lld -> derivation %d: %5.1f %% (%llu of %llu samples)   ", (long long)run, derivation, pct,
                 (unsigned long long)done, (unsigned long long)total);
    std::fflush(stderr);
    shown_ = true;
  }
  void done() {
    if (shown_) std::fputs("\n", stderr);
    shown_ = false;
  }

 private:
  bool tty_;
  bool shown_ = false;
};

json change_json(const storage::ChannelChange& c) {
  json j = json::object();
  if (c.channel) j["channel"] = *c.channel;
  if (c.c_farad) j["c_farad"] = *c.c_farad;
  if (c.r1_ohm) j["r1_ohm"] = *c.r1_ohm;
  if (c.r2_ohm) j["r2_ohm"] = *c.r2_ohm;
  if (c.gain) j["gain"] = *c.gain;
  if (c.zero_code) j["zero_code"] = *c.zero_code;
  if (c.baseline_model) j["baseline_model"] = c.baseline_model == chain::BaselineModel::quadratic ? "quadratic" : "linear";
  if (c.baseline_robust) j["baseline_robust"] = c.baseline_robust == chain::BaselineRobust::huber ? "huber" : "none";
  for (const auto& q : c.add_quiet_windows) j["quiet_windows"].push_back({q.first_index, q.last_index});
  for (const auto d : c.drop_baselines) j["drop_baselines"].push_back(d);
  return j;
}

json result_json(const storage::ReprocessResult& r) {
  json channels = json::array();
  for (const auto& c : r.channels)
    channels.push_back({{"channel", c.channel}, {"calibration_id", c.calibration_id}, {"quantity", c.quantity},
                        {"unit", c.unit}, {"baseline", c.baseline}, {"total", c.total},
                        {"std_uncertainty", c.std_uncertainty}, {"segments", c.segments}, {"flags", c.flags},
                        {"last_index", c.last_index},
                        {"parent_total", c.parent_total ? json(*c.parent_total) : json(nullptr)}});
  return {{"run_id", r.run_id},         {"derivation", r.derivation}, {"parent", r.parent},
          {"raw_blocks", r.blocks},     {"samples", r.samples},       {"raw_index_gaps", r.index_gaps},
          {"raw_gap_samples", r.gap_samples}, {"run_open", r.run_open}, {"changes", json::parse(r.changes)},
          {"channels", channels}};
}

void print_result(const json& r) {
  std::printf("run %lld: derivation %d stored (from derivation %d, %llu raw blocks)\n", (long long)r.value("run_id", 0),
              r.value("derivation", 0), r.value("parent", 0), (unsigned long long)r.value("raw_blocks", 0ull));
  for (const auto& c : r["channels"]) {
    const std::string unit = c.value("unit", "");
    std::printf("  ch %d  %s  %s  ± %s (k=2)", c.value("channel", 0), c.value("quantity", "").c_str(),
                format_si(c.value("total", 0.0), unit, 7).c_str(),
                format_si(2 * c.value("std_uncertainty", 0.0), unit, 2).c_str());
    if (c["parent_total"].is_number() && c["parent_total"].get<double>() != 0.0) {
      const double before = c["parent_total"].get<double>();
      std::printf("   was %s (x %.9g)", format_si(before, unit, 7).c_str(), c.value("total", 0.0) / before);
    }
    std::printf("   baseline %s, calibration %lld\n", c.value("baseline", "").c_str(), (long long)c.value("calibration_id", 0));
  }
  if (r.value("raw_index_gaps", 0) > 0)
    std::printf("  note: %llu hole(s) in the stored raw blocks (%llu samples) were bridged as index gaps\n",
                (unsigned long long)r.value("raw_index_gaps", 0ull), (unsigned long long)r.value("raw_gap_samples", 0ull));
  if (r.value("run_open", false)) std::printf("  note: the run had not ended; the derivation covers it up to its last stored block\n");
}

int offline(const CommonOptions& o, const Args& a) {
  std::vector<storage::RunInfo> runs, chosen;
  {
    std::unique_ptr<storage::Reader> reader;
    if (storage::Status s = storage::Reader::open(a.database, reader); !s.ok() || !(s = reader->runs(runs)).ok()) {
      std::fprintf(stderr, "accrue reprocess: %s: %s\n", a.database.c_str(), s.message.c_str());
      return 1;
    }
  }
  if (!select_runs(a, runs, chosen)) return 1;
  json all = json::array();
  for (const auto& run : chosen) {
    storage::ReprocessRequest req;
    req.run_id = run.run_id;
    req.parent = a.parent;
    req.who = a.who;
    req.reason = a.reason;
    if (!resolve_quiet(a, run, req.changes)) return 2;
    ProgressLine line;
    storage::ReprocessResult result;
    const storage::Status s = storage::reprocess(
        a.database, req, [] { return double(std::time(nullptr)); },
        [&](const storage::ReprocessProgress& p) {
          line.show(p.run_id, p.derivation, p.samples_done, p.samples_total);
          return true;
        },
        result);
    line.done();
    if (!s.ok()) {
      std::fprintf(stderr, "accrue reprocess: run %lld: %s\n", (long long)run.run_id, s.message.c_str());
      return 1;
    }
    const json r = result_json(result);
    if (o.json) all.push_back(r);
    else print_result(r);
  }
  if (o.json) std::cout << json{{"derivations", all}}.dump(2) << "\n";
  return 0;
}

int through_daemon(const CommonOptions& o, const Args& a) {
  // A long recomputation sends progress notifications; the reply comes at the end.
  RpcClient c(o.socket_path, 3600.0);
  std::vector<storage::RunInfo> runs, chosen;
  {
    auto r = c.call("runs");
    if (!r.ok) {
      std::fprintf(stderr, "accrue: %s\n", r.error.c_str());
      return 1;
    }
    for (const auto& j : r.result["runs"]) {
      storage::RunInfo info;
      info.run_id = j.value("run_id", 0ll);
      info.sample_period_s = j.value("sample_period_s", 0.0);
      info.started_utc = j.value("started_utc", "");
      info.ended_utc = j["ended_utc"].is_string() ? j["ended_utc"].get<std::string>() : "";
      info.utc_at_index0 = j.value("utc_at_index0", 0.0);
      runs.push_back(info);
    }
  }
  if (!select_runs(a, runs, chosen)) return 1;
  json all = json::array();
  for (const auto& run : chosen) {
    std::vector<storage::ChannelChange> changes;
    if (!resolve_quiet(a, run, changes)) return 2;
    json params = {{"run_id", run.run_id}, {"who", a.who}, {"reason", a.reason}, {"progress", true}};
    if (a.parent) params["parent"] = *a.parent;
    for (const auto& ch : changes) params["changes"].push_back(change_json(ch));
    ProgressLine line;
    c.on_notification = [&](const json& n) {
      if (n.value("method", "") != "reprocess_progress" || !n.contains("params")) return;
      const json& p = n["params"];
      line.show(p.value("run_id", 0ll), p.value("derivation", 0), p.value("samples_done", 0ull), p.value("samples_total", 0ull));
    };
    // The daemon answers at once (the job it started), then notifies progress and the outcome.
    auto started = c.call("reprocess", params);
    auto r = started.ok ? c.wait_notification("reprocess_done") : started;
    line.done();
    if (r.ok && !r.result.value("ok", false)) r.ok = false, r.error = r.result.value("error", std::string("failed"));
    if (!r.ok) {
      std::fprintf(stderr, "accrue reprocess: run %lld: %s\n", (long long)run.run_id, r.error.c_str());
      return 1;
    }
    if (o.json) all.push_back(r.result["result"]);
    else print_result(r.result["result"]);
  }
  if (o.json) std::cout << json{{"derivations", all}}.dump(2) << "\n";
  return 0;
}

}  // namespace

int cmd_reprocess(const CommonOptions& o, const std::vector<std::string>& args) {
  Args a;
  if (int rc = parse(args, a); rc != 0) return rc;
  return a.database.empty() ? through_daemon(o, a) : offline(o, a);
}

}  // namespace accrue::client
