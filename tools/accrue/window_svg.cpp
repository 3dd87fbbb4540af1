#include "tools/accrue/window_svg.hpp"

#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <limits>
#include <sstream>
#include <vector>

namespace accrue::client {

using nlohmann::json;

double parse_utc(const std::string& text) {
  int y = 0, mo = 0, d = 0, h = 0, mi = 0, used = 0;
  double s = 0;
  if (std::sscanf(text.c_str(), "%4d-%2d-%2dT%2d:%2d:%lfZ%n", &y, &mo, &d, &h, &mi, &s, &used) != 6 ||
      std::size_t(used) != text.size())
    return std::numeric_limits<double>::quiet_NaN();
  using namespace std::chrono;
  const year_month_day ymd{year(y), month(unsigned(mo)), day(unsigned(d))};
  if (!ymd.ok()) return std::numeric_limits<double>::quiet_NaN();
  return double(sys_days(ymd).time_since_epoch().count()) * 86400.0 + h * 3600.0 + mi * 60.0 + s;
}

namespace {

constexpr double kLeft = 86, kRight = 24, kTop = 64, kPanel = 230, kGap = 64, kBottom = 76;

std::string n(double v) {
  char buf[32];
  std::snprintf(buf, sizeof buf, "%.1f", v);
  return buf;
}

// Escapes what XML reserves, and drops control characters XML 1.0 forbids.
std::string xml(const std::string& s) {
  std::string o;
  for (unsigned char c : s) {
    if (c == '<') o += "&lt;";
    else if (c == '>') o += "&gt;";
    else if (c == '&') o += "&amp;";
    else if (c == '"') o += "&quot;";
    else if (c < 0x20 && c != '\t' && c != '\n') o += ' ';
    else o += char(c);
  }
  return o;
}

struct Axis {
  double lo, hi, p0, p1;
  double map(double v) const { return hi == lo ? (p0 + p1) / 2 : p0 + (v - lo) / (hi - lo) * (p1 - p0); }
};

// Ticks at 1, 2 or 5 times a power of ten, about `target` of them over [lo, hi].
double nice_step(double span, int target) {
  const double raw = span / std::max(1, target);
  const double mag = std::pow(10.0, std::floor(std::log10(raw)));
  for (double m : {1.0, 2.0, 5.0, 10.0})
    if (m * mag >= raw) return m * mag;
  return 10 * mag;
}

// An SI prefix for values up to `magnitude`, so tick labels stay short.
std::pair<double, std::string> prefix_for(double magnitude) {
  static const std::pair<double, const char*> p[] = {{1e9, "G"}, {1e6, "M"}, {1e3, "k"}, {1, ""}, {1e-3, "m"},
                                                     {1e-6, "µ"}, {1e-9, "n"}, {1e-12, "p"}, {1e-15, "f"}};
  for (const auto& [f, name] : p)
    if (magnitude >= f * 0.9999995) return {f, name};
  return {1e-15, "f"};
}

std::string tick_text(double v, double step) {
  const int decimals = std::max(0, int(-std::floor(std::log10(step) + 1e-9)));
  char buf[40];
  std::snprintf(buf, sizeof buf, "%.*f", decimals, std::fabs(v) < step * 1e-6 ? 0.0 : v);
  return buf;
}

// Clock text of Unix seconds in UTC; with seconds when the step needs them.
std::string clock_text(double unix_s, double step_s) {
  const auto t = std::chrono::sys_seconds(std::chrono::seconds((long long)std::floor(unix_s)));
  const auto day = std::chrono::floor<std::chrono::days>(t);
  const std::chrono::hh_mm_ss hms(t - day);
  char buf[32];
  if (step_s >= 60) std::snprintf(buf, sizeof buf, "%02d:%02d", int(hms.hours().count()), int(hms.minutes().count()));
  else std::snprintf(buf, sizeof buf, "%02d:%02d:%02d", int(hms.hours().count()), int(hms.minutes().count()), int(hms.seconds().count()));
  return buf;
}

double time_step(double span_s) {
  for (double s : {1.0, 2.0, 5.0, 10.0, 15.0, 30.0, 60.0, 120.0, 300.0, 600.0, 900.0, 1800.0, 3600.0, 7200.0, 10800.0,
                   21600.0, 43200.0, 86400.0})
    if (span_s / s <= 9) return s;
  return nice_step(span_s, 8);
}

struct Series {
  std::vector<double> t, total, total_u, rate;
};

struct Mark {
  double t;
  std::string kind, detail;
};

struct Band {
  double t0, t1;
  bool quiet;  // quiet window (user-marked) or zero window (relay)
};

}  // namespace

std::string window_svg(const json& window, const json& events, const PlotOptions& options) {
  const double period = window.value("sample_period_s", 0.0);
  const json& points = window["points"];
  Series s;
  double t_index0 = std::numeric_limits<double>::quiet_NaN();  // Unix seconds of sample index 0
  for (const auto& p : points) {
    const auto index = p.value("index", std::uint64_t(0));
    if (std::isnan(t_index0)) t_index0 = parse_utc(p.value("utc", "")) - double(index) * period;
    // Plot each bucket at its end, where its total holds.
    s.t.push_back(t_index0 + double(index + p.value("samples", std::uint64_t(0))) * period);
    s.total.push_back(p.value("total", 0.0));
    s.total_u.push_back(p.value("total_u", 0.0));
    s.rate.push_back(p.value("rate", 0.0));
  }
  if (std::isnan(t_index0)) t_index0 = 0;
  const double t_lo = points.empty() ? 0 : t_index0 + double(points.front().value("index", std::uint64_t(0))) * period;
  const double t_hi = s.t.empty() ? 1 : std::max(s.t.back(), t_lo + period);

  // Events: positions from the sample index when there is one, else host time.
  std::vector<Mark> resets, marks;
  std::vector<Band> bands;
  double zero_open = std::numeric_limits<double>::quiet_NaN();  // relay closed at, while open
  for (const auto& e : events) {
    double t = std::numeric_limits<double>::quiet_NaN();
    if (e.contains("sample_index") && e["sample_index"].is_number()) t = t_index0 + e["sample_index"].get<double>() * period;
    else if (e.contains("host_utc") && e["host_utc"].is_string()) t = parse_utc(e["host_utc"].get<std::string>());
    if (std::isnan(t)) continue;
    const std::string kind = e.value("kind", "");
    const std::string detail = e.contains("detail") && e["detail"].is_string() ? e["detail"].get<std::string>() : "";
    if (kind == "board_reset_begin") {
      resets.push_back({t, kind, detail});
    } else if (kind == "board_reset_end") {
      continue;  // the begin marks the reset
    } else if (kind == "board_zero_relay_closed") {
      zero_open = t;
    } else if (kind == "board_zero_relay_opened") {
      // Opened with no close seen: the relay was closed from the run's start
      // (the daemon may record that close before the run exists).
      bands.push_back({std::isnan(zero_open) ? t_index0 : zero_open, t, false});
      zero_open = std::numeric_limits<double>::quiet_NaN();
    } else if (kind == "quiet_window") {
      const json d = json::parse(detail, nullptr, false);
      if (d.is_object() && d.contains("from_index") && d.contains("to_index"))
        bands.push_back({t_index0 + d["from_index"].get<double>() * period, t_index0 + d["to_index"].get<double>() * period, true});
    } else {
      marks.push_back({t, kind, detail});
    }
  }
  if (!std::isnan(zero_open)) bands.push_back({zero_open, t_hi, false});

  const double width = std::max(480.0, options.width_px);
  const double height = kTop + 2 * kPanel + kGap + kBottom;
  const Axis x{t_lo, t_hi, kLeft, width - kRight};
  const std::string unit = window.value("unit", "");
  const std::string rate_unit = window.value("rate_unit", "");
  const std::string quantity = window.value("quantity", "");
  std::string title = options.title;
  if (title.empty())
    title = "run " + std::to_string(window.value("run_id", 0)) + ", channel " + std::to_string(window.value("channel", 0)) +
            ": " + quantity;

  std::ostringstream o;
  o << "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n";
  o << "<svg xmlns=\"http://www.w3.org/2000/svg\" version=\"1.1\" width=\"" << n(width) << "\" height=\"" << n(height)
    << "\" viewBox=\"0 0 " << n(width) << " " << n(height) << "\" font-family=\"sans-serif\" font-size=\"12\">\n";
  o << "<title>" << xml(title) << "</title>\n";
  o << "<rect width=\"100%\" height=\"100%\" fill=\"white\"/>\n";
  o << "<text id=\"title\" x=\"" << n(width / 2) << "\" y=\"26\" text-anchor=\"middle\" font-size=\"16\" font-weight=\"bold\">"
    << xml(title) << "</text>\n";
  o << "<text x=\"" << n(width / 2) << "\" y=\"44\" text-anchor=\"middle\" fill=\"#444\">" << xml(quantity) << " in "
    << xml(unit) << ", " << points.size() << " points of " << window.value("bucket_samples", std::uint64_t(0))
    << " samples, from " << xml(points.empty() ? "-" : points.front().value("utc", "")) << "</text>\n";

  // One panel: frame, grid with labelled ticks, bands and markers, the data.
  auto panel = [&](const char* id, double top, const std::vector<double>& v, const std::vector<double>* band_u,
                   const std::string& name, const std::string& panel_unit, const char* colour, const char* stroke_width) {
    double lo = 0, hi = 0;
    bool first = true;
    for (std::size_t i = 0; i < v.size(); ++i) {
      const double u = band_u ? 2 * (*band_u)[i] : 0.0;
      if (!std::isfinite(v[i])) continue;
      lo = first ? v[i] - u : std::min(lo, v[i] - u);
      hi = first ? v[i] + u : std::max(hi, v[i] + u);
      first = false;
    }
    if (hi == lo) {
      const double pad = lo == 0 ? 1e-12 : std::fabs(lo) * 0.05;
      lo -= pad, hi += pad;
    }
    const double pad = (hi - lo) * 0.05;
    lo -= pad, hi += pad;
    const auto [factor, prefix] = prefix_for(std::max(std::fabs(lo), std::fabs(hi)));
    const double step = nice_step((hi - lo) / factor, 5);
    const Axis y{lo, hi, top + kPanel, top};
    o << "<g id=\"" << id << "\">\n";
    o << "<rect x=\"" << n(x.p0) << "\" y=\"" << n(top) << "\" width=\"" << n(x.p1 - x.p0) << "\" height=\"" << n(kPanel)
      << "\" fill=\"none\" stroke=\"#222\"/>\n";
    for (double tv = std::ceil(lo / factor / step) * step; tv <= hi / factor + step * 1e-9; tv += step) {
      const double py = y.map(tv * factor);
      o << "<line x1=\"" << n(x.p0) << "\" y1=\"" << n(py) << "\" x2=\"" << n(x.p1) << "\" y2=\"" << n(py)
        << "\" stroke=\"#e4e4e4\"/>";
      o << "<text x=\"" << n(x.p0 - 6) << "\" y=\"" << n(py + 4) << "\" text-anchor=\"end\">" << tick_text(tv, step)
        << "</text>\n";
    }
    const double ts = time_step(t_hi - t_lo);
    for (double tv = std::ceil(t_lo / ts) * ts; tv <= t_hi + 1e-9; tv += ts) {
      const double px = x.map(tv);
      o << "<line x1=\"" << n(px) << "\" y1=\"" << n(top) << "\" x2=\"" << n(px) << "\" y2=\"" << n(top + kPanel)
        << "\" stroke=\"#e4e4e4\"/>";
      o << "<text x=\"" << n(px) << "\" y=\"" << n(top + kPanel + 16) << "\" text-anchor=\"middle\">"
        << clock_text(tv, ts) << "</text>\n";
    }
    const std::string axis_label = name + " (" + prefix + panel_unit + ")";
    o << "<text class=\"axis-label\" transform=\"translate(" << n(kLeft - 60) << "," << n(top + kPanel / 2)
      << ") rotate(-90)\" text-anchor=\"middle\">" << xml(axis_label) << "</text>\n";
    for (const auto& b : bands) {
      const double a = std::clamp(x.map(b.t0), x.p0, x.p1), z = std::clamp(x.map(b.t1), x.p0, x.p1);
      o << "<rect class=\"" << (b.quiet ? "quiet-window" : "zero-window") << "\" x=\"" << n(a) << "\" y=\"" << n(top)
        << "\" width=\"" << n(std::max(1.0, z - a)) << "\" height=\"" << n(kPanel) << "\" fill=\""
        << (b.quiet ? "#9c6" : "#69c") << "\" fill-opacity=\"0.25\"/>\n";
    }
    for (const auto& r : resets) {
      if (r.t < t_lo || r.t > t_hi) continue;
      o << "<line class=\"reset\" x1=\"" << n(x.map(r.t)) << "\" y1=\"" << n(top + kPanel - 10) << "\" x2=\""
        << n(x.map(r.t)) << "\" y2=\"" << n(top + kPanel) << "\" stroke=\"#888\"/>";
    }
    o << "\n";
    for (const auto& m : marks) {
      if (m.t < t_lo || m.t > t_hi) continue;
      const double px = x.map(m.t);
      o << "<g class=\"event\"><title>" << xml(m.kind + (m.detail.empty() ? "" : ": " + m.detail)) << "</title><line x1=\""
        << n(px) << "\" y1=\"" << n(top) << "\" x2=\"" << n(px) << "\" y2=\"" << n(top + kPanel)
        << "\" stroke=\"#d60\" stroke-dasharray=\"3 3\"/><path d=\"M" << n(px - 5) << "," << n(top) << " L" << n(px + 5)
        << "," << n(top) << " L" << n(px) << "," << n(top + 8) << " Z\" fill=\"#d60\"/></g>\n";
    }
    if (band_u && !v.empty()) {
      o << "<polygon class=\"uncertainty\" fill=\"" << colour << "\" fill-opacity=\"0.18\" stroke=\"none\" points=\"";
      for (std::size_t i = 0; i < v.size(); ++i) o << n(x.map(s.t[i])) << "," << n(y.map(v[i] + 2 * (*band_u)[i])) << " ";
      for (std::size_t i = v.size(); i-- > 0;) o << n(x.map(s.t[i])) << "," << n(y.map(v[i] - 2 * (*band_u)[i])) << " ";
      o << "\"/>\n";
    }
    o << "<polyline class=\"series\" fill=\"none\" stroke=\"" << colour << "\" stroke-width=\"" << stroke_width << "\" points=\"";
    for (std::size_t i = 0; i < v.size(); ++i) o << n(x.map(s.t[i])) << "," << n(y.map(v[i])) << (i + 1 < v.size() ? " " : "");
    o << "\"/>\n</g>\n";
  };
  panel("total", kTop, s.total, &s.total_u, "running total", unit, "#c03", "1.6");
  panel("rate", kTop + kPanel + kGap, s.rate, nullptr, "rate", rate_unit, "#05a", "1");

  const double bottom = kTop + 2 * kPanel + kGap;
  std::string day = points.empty() ? "" : points.front().value("utc", "").substr(0, 10);
  o << "<text class=\"axis-label\" x=\"" << n((x.p0 + x.p1) / 2) << "\" y=\"" << n(bottom + 36)
    << "\" text-anchor=\"middle\">time (UTC" << (day.empty() ? "" : ", from " + xml(day)) << ")</text>\n";
  // Legend.
  const double ly = height - 18;
  double lx = kLeft;
  auto legend = [&](const std::string& swatch, const std::string& text) {
    o << swatch << "<text x=\"" << n(lx + 26) << "\" y=\"" << n(ly + 4) << "\">" << xml(text) << "</text>\n";
    lx += 26 + 7.0 * double(text.size()) + 18;
  };
  legend("<line x1=\"" + n(lx) + "\" y1=\"" + n(ly) + "\" x2=\"" + n(lx + 20) + "\" y2=\"" + n(ly) +
             "\" stroke=\"#c03\" stroke-width=\"1.6\"/>",
         "total, band U (k=2)");
  legend("<line x1=\"" + n(lx) + "\" y1=\"" + n(ly) + "\" x2=\"" + n(lx + 20) + "\" y2=\"" + n(ly) +
             "\" stroke=\"#05a\" stroke-width=\"1.6\"/>",
         "rate");
  legend("<line x1=\"" + n(lx + 10) + "\" y1=\"" + n(ly - 6) + "\" x2=\"" + n(lx + 10) + "\" y2=\"" + n(ly + 6) +
             "\" stroke=\"#888\"/>",
         "reset (" + std::to_string(resets.size()) + ")");
  legend("<rect x=\"" + n(lx) + "\" y=\"" + n(ly - 6) + "\" width=\"20\" height=\"12\" fill=\"#69c\" fill-opacity=\"0.25\"/>",
         "zero window");
  legend("<rect x=\"" + n(lx) + "\" y=\"" + n(ly - 6) + "\" width=\"20\" height=\"12\" fill=\"#9c6\" fill-opacity=\"0.25\"/>",
         "quiet window");
  legend("<path d=\"M" + n(lx + 5) + "," + n(ly - 4) + " L" + n(lx + 15) + "," + n(ly - 4) + " L" + n(lx + 10) + "," +
             n(ly + 4) + " Z\" fill=\"#d60\"/>",
         "other event (" + std::to_string(marks.size()) + ")");
  o << "</svg>\n";
  return o.str();
}

}  // namespace accrue::client
