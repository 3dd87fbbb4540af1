#pragma once
// window_svg draws a window of one channel as a standalone SVG 1.1 document:
// the running total (with its k=2 uncertainty band) above and the rate below,
// on a shared UTC time axis, with reset markers, zero windows and quiet
// windows shaded, other events marked and named, axis labels with units and
// a title. It takes the "window" reply (select "all", pages merged) and the
// run's events (the "events" method's rows); it writes text, does no I/O, and
// escapes every string it copies into the document, so the result is
// well-formed XML whatever the data says.
#include <string>

#include <nlohmann/json.hpp>

namespace accrue::client {

struct PlotOptions {
  std::string title;      // empty: "run R, channel C: quantity"
  double width_px = 960;  // the whole picture
};

std::string window_svg(const nlohmann::json& window, const nlohmann::json& events, const PlotOptions& options);

// Unix seconds of RFC 3339 text in UTC ("2026-12-01T23:13:17.879Z"); nullopt-like NaN when not that form.
double parse_utc(const std::string& text);

}  // namespace accrue::client
