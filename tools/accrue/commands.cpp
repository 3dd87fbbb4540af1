#include "tools/accrue/commands.hpp"

#include <chrono>
#include <cmath>
#include <cstdio>
#include <fstream>
#include <iostream>
#include <thread>

#include "tools/accrue/cli_args.hpp"
#include "tools/accrue/rpc_client.hpp"
#include "tools/accrue/window_fetch.hpp"

namespace accrue::client {

using nlohmann::json;

std::string format_si(double value, const std::string& unit, int digits) {
  static const struct {
    double scale;
    const char* prefix;
  } prefixes[] = {{1e9, "G"}, {1e6, "M"}, {1e3, "k"}, {1, ""}, {1e-3, "m"}, {1e-6, "µ"}, {1e-9, "n"}, {1e-12, "p"}, {1e-15, "f"}};
  const double mag = std::fabs(value);
  for (const auto& p : prefixes) {
    if (mag >= p.scale * 0.999999 || p.scale == 1e-15) {
      char buf[64];
      std::snprintf(buf, sizeof buf, "%.*g %s%s", digits, value / p.scale, p.prefix, unit.c_str());
      return mag == 0 ? "0 " + unit : buf;
    }
  }
  return std::to_string(value) + " " + unit;
}

int cmd_status(const CommonOptions& o, const std::vector<std::string>&) {
  RpcClient c(o.socket_path);
  auto r = c.call("status");
  if (!r.ok) return fail(r);
  if (o.json) {
    std::cout << r.result.dump(2) << "\n";
    return 0;
  }
  const json& s = r.result;
  std::printf("link      %s  %s\n", s["link"].value("state", "").c_str(), s["link"].value("device", "").c_str());
  if (s.contains("board"))
    std::printf("board     serial %lld, %d channel(s), %d-bit ADC, sample period %s\n",
                (long long)s["board"].value("serial", 0), s["board"].value("channels", 0), s["board"].value("adc_bits", 0),
                format_si(s["board"].value("sample_period_s", 0.0), "s").c_str());
  if (!s["run"].is_null()) {
    std::printf("run       %lld, next sample index %llu\n", (long long)s["run"].value("run_id", 0),
                (unsigned long long)s["run"].value("next_index", 0ull));
    for (const auto& ch : s["run"]["channels"]) {
      std::printf("  ch %d   %s %s (u = %s), %u segment(s)\n", ch.value("channel", 0), ch.value("quantity", "").c_str(),
                  format_si(ch.value("total", 0.0), ch.value("unit", "")).c_str(),
                  format_si(ch.value("std_uncertainty", 0.0), ch.value("unit", ""), 3).c_str(),
                  ch.value("segments", 0u));
    }
  } else {
    std::printf("run       none active\n");
  }
  if (s.contains("reset_schedule") && s["reset_schedule"].is_object()) {
    // One reset switch per board: the schedule, its next and last reset, and the command counts.
    const json& rs = s["reset_schedule"];
    std::string next = "none planned", last = "none seen";
    if (rs["next_reset"].is_object())
      next = rs["next_reset"].value("why", "") +
             (rs["next_reset"]["utc"].is_string() ? " at " + rs["next_reset"]["utc"].get<std::string>() : std::string());
    if (rs["last_reset"].is_object())
      last = rs["last_reset"].value("utc", "") + " (" + rs["last_reset"].value("why", "") + ")";
    std::printf("reset     %s; next %s; last %s; commanded %llu, acked %llu, failed %llu\n",
                rs.value("enabled", false) ? "scheduled" : "no schedule (board's own resets followed)", next.c_str(),
                last.c_str(), (unsigned long long)rs.value("commanded", 0ull), (unsigned long long)rs.value("acked", 0ull),
                (unsigned long long)rs.value("failed", 0ull));
    for (const auto& ch : rs["channels"])
      if (ch["threshold_v"].is_number())
        std::printf("  ch %d   at %.1f %% of full scale, threshold %s\n", ch.value("channel", 0),
                    100.0 * ch.value("level_fraction", 0.0), format_si(ch.value("threshold_v", 0.0), "V").c_str());
  }
  const json& d = s["decoder"];
  std::printf("decoder   %llu frames, %llu bytes discarded, %llu bad CRC\n",
              (unsigned long long)d.value("frames_ok", 0ull), (unsigned long long)d.value("discarded_bytes", 0ull),
              (unsigned long long)d.value("bad_crc", 0ull));
  const json& w = s["writer"];
  std::printf("writer    %llu commits, %llu raw blocks written, %llu shed, %llu bytes queued\n",
              (unsigned long long)w.value("commits", 0ull), (unsigned long long)w.value("raw_blocks_written", 0ull),
              (unsigned long long)w.value("raw_blocks_shed", 0ull), (unsigned long long)w.value("queued_bytes", 0ull));
  std::printf("database  %s\n", s.value("database", "").c_str());
  return 0;
}

int cmd_totals(const CommonOptions& o, const std::vector<std::string>&) {
  RpcClient c(o.socket_path);
  auto r = c.call("totals");
  if (!r.ok) return fail(r);
  if (o.json) {
    std::cout << r.result.dump(2) << "\n";
    return 0;
  }
  std::printf("%-4s %-5s %-13s %-18s %-16s %-9s %s\n", "ch", "run", "quantity", "total", "U (k=2)", "segments", "committed");
  for (const auto& ch : r.result["channels"]) {
    const std::string unit = ch.value("unit", "");
    std::printf("%-4d %-5lld %-13s %-18s %-16s %-9u %s\n", ch.value("channel", 0), (long long)ch.value("run_id", 0),
                ch.value("quantity", "").c_str(), format_si(ch.value("total", 0.0), unit).c_str(),
                format_si(ch.value("expanded_uncertainty_k2", 0.0), unit, 3).c_str(), ch.value("segments", 0u),
                ch.value("committed_utc", "").c_str());
  }
  return 0;
}

int cmd_runs(const CommonOptions& o, const std::vector<std::string>&) {
  RpcClient c(o.socket_path);
  auto r = c.call("runs");
  if (!r.ok) return fail(r);
  if (o.json) {
    std::cout << r.result.dump(2) << "\n";
    return 0;
  }
  std::printf("%-5s %-8s %-26s %-26s %s\n", "run", "board", "started", "ended", "reason");
  for (const auto& run : r.result["runs"]) {
    std::printf("%-5lld %-8lld %-26s %-26s %s\n", (long long)run.value("run_id", 0), (long long)run.value("board_serial", 0),
                run.value("started_utc", "").c_str(), run["ended_utc"].is_null() ? "-" : run["ended_utc"].get<std::string>().c_str(),
                run.value("end_reason", "").c_str());
  }
  return 0;
}

int cmd_window(const CommonOptions& o, const std::vector<std::string>& args) {
  const WindowOptions w = parse_window_options(args);
  if (!w.rest.empty()) {
    std::fprintf(stderr, "accrue window: unknown option %s\n", w.rest[0].c_str());
    return 2;
  }
  RpcClient c(o.socket_path);
  auto r = fetch_window(c, w.params);
  if (!r.ok) return fail(r);
  if (o.json) {
    std::cout << r.result.dump(2) << "\n";
    return 0;
  }
  const std::string unit = r.result.value("unit", "");
  std::printf("run %lld channel %d, %s in %s\n", (long long)r.result.value("run_id", 0), r.result.value("channel", 0),
              r.result.value("quantity", "").c_str(), unit.c_str());
  std::printf("%-26s %-12s %-12s %-12s %-14s %s\n", "utc", "index", "mean V", "min V", "total", "u");
  for (const auto& p : r.result["points"]) {
    std::printf("%-26s %-12llu %-12.6f %-12.6f %-14.7g %.3g\n", p.value("utc", "").c_str(),
                (unsigned long long)p.value("index", 0ull), p.value("mean_v", 0.0), p.value("min_v", 0.0),
                p.value("total", 0.0), p.value("total_u", 0.0));
  }
  return 0;
}

int cmd_compare(const CommonOptions& o, const std::vector<std::string>& args) {
  std::string truth_path, max_error;
  for (std::size_t i = 0; i < args.size(); ++i) {
    if (parse_flag(args, i, "--truth", truth_path) || parse_flag(args, i, "--max-error-percent", max_error)) continue;
    std::fprintf(stderr, "accrue compare: unknown option %s\n", args[i].c_str());
    return 2;
  }
  if (truth_path.empty()) {
    std::fprintf(stderr, "accrue compare: --truth FILE is required\n");
    return 2;
  }
  std::ifstream in(truth_path);
  const json truth = json::parse(in, nullptr, false);
  if (truth.is_discarded() || !truth.contains("true_total")) {
    std::fprintf(stderr, "accrue compare: %s is not a truth file\n", truth_path.c_str());
    return 2;
  }
  RpcClient c(o.socket_path);
  auto totals = c.call("totals");
  if (!totals.ok) return fail(totals);
  if (totals.result["channels"].empty()) {
    std::fprintf(stderr, "accrue compare: the daemon has no totals yet\n");
    return 1;
  }
  const json& ch = totals.result["channels"][0];
  auto window = c.call("window", {{"channel", ch.value("channel", 0)}, {"run_id", ch.value("run_id", 0)}, {"max_points", 100000}});
  if (!window.ok) return fail(window);
  const auto& points = window.result["points"];
  const double true_total = truth["true_total"].get<double>();
  const double total = ch.value("total", 0.0);
  const double u2 = ch.value("expanded_uncertainty_k2", 0.0);
  const double stitched = ch.value("stitched_uncorrected", 0.0);
  // Plain uncorrected integration: the output's change over the run times the
  // calibration factor, ignoring resets and drift (as a naive logger would).
  double raw = 0.0;
  const double quantity_per_volt = ch.value("quantity_per_volt", 0.0);
  if (!points.empty()) raw = quantity_per_volt * (points.back().value("last_v", 0.0) - points.front().value("mean_v", 0.0));
  const auto rel = [&](double v) { return true_total != 0 ? 100.0 * (v - true_total) / true_total : 0.0; };
  const std::string unit = ch.value("unit", "");
  const bool covered = std::fabs(total - true_total) <= u2;
  if (o.json) {
    std::cout << json{{"total", total},
                      {"expanded_uncertainty_k2", u2},
                      {"truth", true_total},
                      {"relative_error_percent", rel(total)},
                      {"covered_by_k2", covered},
                      {"uncorrected", raw},
                      {"uncorrected_relative_error_percent", rel(raw)},
                      {"stitched_uncorrected", stitched},
                      {"stitched_uncorrected_relative_error_percent", rel(stitched)},
                      {"unit", unit}}
                     .dump(2)
              << "\n";
  } else {
    std::printf("accumulated %s (channel %d, run %lld): %s  ± %s (k=2)\n", ch.value("quantity", "").c_str(),
                ch.value("channel", 0), (long long)ch.value("run_id", 0), format_si(total, unit, 7).c_str(),
                format_si(u2, unit, 2).c_str());
    std::printf("simulator truth:                          %s\n", format_si(true_total, unit, 7).c_str());
    std::printf("relative error:                           %+.2g %%%s\n", rel(total),
                covered ? "  (within the stated uncertainty)" : "  (OUTSIDE the stated uncertainty)");
    std::printf("for contrast, plain uncorrected integration\n");
    std::printf("  (output change, no drift removal, no reset stitching): %s  (%+.2f %%)\n",
                format_si(raw, unit, 5).c_str(), rel(raw));
    std::printf("  (resets stitched, no drift removal):                   %s  (%+.2f %%)\n",
                format_si(stitched, unit, 5).c_str(), rel(stitched));
  }
  if (!max_error.empty() && std::fabs(rel(total)) > std::stod(max_error)) {
    std::fprintf(stderr, "accrue compare: relative error %.4f %% exceeds %s %%\n", rel(total), max_error.c_str());
    return 1;
  }
  return 0;
}

int cmd_wait(const CommonOptions& o, const std::vector<std::string>& args) {
  std::string timeout = "300";
  for (std::size_t i = 0; i < args.size(); ++i) {
    if (parse_flag(args, i, "--timeout", timeout)) continue;
    std::fprintf(stderr, "accrue wait: unknown option %s\n", args[i].c_str());
    return 2;
  }
  // Waits until the newest run has ended and the writer has committed everything.
  const auto deadline = std::chrono::steady_clock::now() + std::chrono::duration<double>(std::stod(timeout));
  std::string last_error;
  while (std::chrono::steady_clock::now() < deadline) {
    RpcClient c(o.socket_path, 5.0);
    auto runs = c.call("runs");
    auto status = runs.ok ? c.call("status") : runs;
    if (runs.ok && status.ok && !runs.result["runs"].empty() && !runs.result["runs"].back()["ended_utc"].is_null() &&
        status.result["run"].is_null() && status.result["writer"].value("queued_bytes", 1) == 0) {
      if (!o.json) std::printf("run %lld ended\n", (long long)runs.result["runs"].back().value("run_id", 0));
      return 0;
    }
    last_error = runs.ok ? status.error : runs.error;
    std::this_thread::sleep_for(std::chrono::milliseconds(200));
  }
  std::fprintf(stderr, "accrue wait: timed out%s%s\n", last_error.empty() ? "" : ": ", last_error.c_str());
  return 1;
}

}  // namespace accrue::client
