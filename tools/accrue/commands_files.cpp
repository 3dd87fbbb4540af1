// accrue export (a window as RFC 4180 CSV) and accrue plot (a window as an
// SVG picture). Both read the whole window, following continuation pages.
#include <cstdio>
#include <fstream>
#include <iostream>
#include <string>

#include "tools/accrue/cli_args.hpp"
#include "tools/accrue/commands.hpp"
#include "tools/accrue/csv_export.hpp"
#include "tools/accrue/rpc_client.hpp"
#include "tools/accrue/window_fetch.hpp"
#include "tools/accrue/window_svg.hpp"

namespace accrue::client {

using nlohmann::json;

namespace {

// Writes `text` to `path` ("-" or empty: stdout). False with a message on failure.
bool write_out(const std::string& path, const std::string& text, const char* command) {
  if (path.empty() || path == "-") {
    std::cout.write(text.data(), std::streamsize(text.size()));
    std::cout.flush();
    return bool(std::cout);
  }
  std::ofstream out(path, std::ios::binary | std::ios::trunc);
  out.write(text.data(), std::streamsize(text.size()));
  out.close();
  if (!out) {
    std::fprintf(stderr, "accrue %s: cannot write %s\n", command, path.c_str());
    return false;
  }
  return true;
}

// Every event of a run that concerns `channel` (or every channel), following
// next_after (at most max_rows).
RpcResult fetch_events(RpcClient& c, long long run_id, int channel, std::size_t max_rows = 200000) {
  RpcResult all;
  all.ok = true;
  all.result = json::array();
  json params = {{"run_id", run_id}, {"channel", channel}, {"limit", 10000}};
  for (;;) {
    RpcResult page = c.call("events", params);
    if (!page.ok) return page;
    for (auto& e : page.result["events"]) all.result.push_back(std::move(e));
    if (page.result["next_after"].is_null() || all.result.size() >= max_rows) return all;
    params["after"] = page.result["next_after"];
  }
}

}  // namespace

int cmd_export(const CommonOptions& o, const std::vector<std::string>& args) {
  WindowOptions w = parse_window_options(args);
  std::string output;
  for (std::size_t i = 0; i < w.rest.size(); ++i) {
    if (parse_flag(w.rest, i, "--output", output) || parse_flag(w.rest, i, "-o", output)) continue;
    std::fprintf(stderr, "accrue export: unknown option %s\n", w.rest[i].c_str());
    return 2;
  }
  if (!w.params.contains("select")) w.params["select"] = "all";
  RpcClient c(o.socket_path);
  auto r = fetch_window(c, w.params);
  if (!r.ok) return fail(r);
  return write_out(output, window_csv(r.result), "export") ? 0 : 1;
}

int cmd_plot(const CommonOptions& o, const std::vector<std::string>& args) {
  WindowOptions w = parse_window_options(args);
  std::string output;
  PlotOptions plot;
  for (std::size_t i = 0; i < w.rest.size(); ++i) {
    std::string v;
    if (parse_flag(w.rest, i, "--output", output) || parse_flag(w.rest, i, "-o", output)) continue;
    if (parse_flag(w.rest, i, "--title", plot.title)) continue;
    if (parse_flag(w.rest, i, "--width", v)) {
      plot.width_px = double(whole_number("--width", v));
      continue;
    }
    std::fprintf(stderr, "accrue plot: unknown option %s\n", w.rest[i].c_str());
    return 2;
  }
  if (w.params.contains("select") && w.params["select"] != "all") {
    std::fprintf(stderr, "accrue plot: draws the total and the rate; --select does not apply\n");
    return 2;
  }
  w.params["select"] = "all";
  if (!w.params.contains("max_points")) w.params["max_points"] = 1000;
  RpcClient c(o.socket_path);
  auto r = fetch_window(c, w.params);
  if (!r.ok) return fail(r);
  if (r.result["points"].empty()) {
    std::fprintf(stderr, "accrue plot: the window holds no data\n");
    return 1;
  }
  auto events = fetch_events(c, r.result.value("run_id", 0LL), r.result.value("channel", 0));
  if (!events.ok) return fail(events);
  return write_out(output, window_svg(r.result, events.result, plot), "plot") ? 0 : 1;
}

}  // namespace accrue::client
