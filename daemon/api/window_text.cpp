#include "daemon/api/window_text.hpp"

#include <charconv>
#include <cmath>

#include "storage/utc.hpp"

namespace accrue::daemon::api {

namespace {

void number(std::string& out, double v) {
  if (!std::isfinite(v)) {
    out += "null";  // what json::dump() writes for NaN and infinities
    return;
  }
  char buf[32];
  const auto r = std::to_chars(buf, buf + sizeof buf, v);
  out.append(buf, r.ptr);
  // json::dump() marks a whole-valued double as a double ("0.0", "2.0").
  const std::string_view s(buf, std::size_t(r.ptr - buf));
  if (s.find_first_of(".eEn") == std::string_view::npos) out += ".0";
}

void number(std::string& out, std::uint64_t v) {
  char buf[24];
  const auto r = std::to_chars(buf, buf + sizeof buf, v);
  out.append(buf, r.ptr);
}

void field(std::string& out, const char* key, double v) {
  out += '"';
  out += key;
  out += "\":";
  number(out, v);
  out += ',';
}

}  // namespace

void append_window_points(std::string& out, const WindowPage& page, double utc_at_index0, double sample_period_s,
                          WindowFields f) {
  out.reserve(out.size() + page.buckets.size() * 260);
  out += '[';
  bool first = true;
  for (const Bucket& b : page.buckets) {
    if (!first) out += ',';
    first = false;
    out += '{';
    // Keys in sorted order, as json::dump() writes an object.
    if (f.quantity) field(out, "delta", b.delta);
    out += "\"index\":";
    number(out, b.first_index);
    out += ',';
    if (f.volts) {
      field(out, "last_v", b.last_v);
      field(out, "max_v", b.max_v);
      field(out, "mean_v", b.mean_v);
      field(out, "min_v", b.min_v);
    }
    if (f.rate) {
      const double span_s = double(b.samples) * sample_period_s;
      field(out, "rate", span_s > 0 ? b.delta / span_s : 0.0);
    }
    out += "\"samples\":";
    number(out, b.samples);
    out += ',';
    if (f.total) {
      field(out, "total", b.total);
      field(out, "total_u", b.total_u);
    }
    out += "\"utc\":\"";
    out += storage::rfc3339_utc(utc_at_index0 + double(b.first_index) * sample_period_s);
    out += "\"}";
  }
  out += ']';
}

}  // namespace accrue::daemon::api
