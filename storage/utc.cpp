#include "storage/utc.hpp"

#include <chrono>
#include <cmath>
#include <cstdio>

namespace accrue::storage {

std::string rfc3339_utc(double unix_seconds) {
  using namespace std::chrono;
  const double floor_s = std::floor(unix_seconds);
  int millis = int(std::llround((unix_seconds - floor_s) * 1000.0));
  auto secs = sys_seconds(seconds(static_cast<long long>(floor_s)));
  if (millis >= 1000) {
    millis -= 1000;
    secs += seconds(1);
  }
  const auto day = floor<days>(secs);
  const year_month_day ymd(day);
  const hh_mm_ss hms(secs - day);
  char buf[40];
  std::snprintf(buf, sizeof buf, "%04d-%02u-%02uT%02ld:%02ld:%02lldZ", int(ymd.year()), unsigned(ymd.month()),
                unsigned(ymd.day()), long(hms.hours().count()), long(hms.minutes().count()),
                static_cast<long long>(hms.seconds().count()));
  // Always three decimals: the store compares these as text (events' host_utc
  // against a query's bounds), and text order is time order only at one width
  // ("10:00:00Z" would sort after "10:00:00.250Z").
  std::string out(buf);
  char frac[16];
  std::snprintf(frac, sizeof frac, ".%03d", millis);
  out.insert(out.size() - 1, frac);
  return out;
}

std::optional<double> parse_rfc3339(std::string_view t) {
  using namespace std::chrono;
  auto digits = [&](std::size_t at, std::size_t n, int& v) {
    if (at + n > t.size()) return false;
    v = 0;
    for (std::size_t i = at; i < at + n; ++i) {
      if (t[i] < '0' || t[i] > '9') return false;
      v = v * 10 + (t[i] - '0');
    }
    return true;
  };
  int Y, M, D, h, m, s;
  if (t.size() < 20 || !digits(0, 4, Y) || t[4] != '-' || !digits(5, 2, M) || t[7] != '-' || !digits(8, 2, D) ||
      (t[10] != 'T' && t[10] != 't' && t[10] != ' ') || !digits(11, 2, h) || t[13] != ':' || !digits(14, 2, m) ||
      t[16] != ':' || !digits(17, 2, s))
    return std::nullopt;
  const year_month_day ymd{year(Y), month(unsigned(M)), day(unsigned(D))};
  if (!ymd.ok() || h > 23 || m > 59 || s > 60) return std::nullopt;
  std::size_t at = 19;
  double frac = 0.0;
  if (at < t.size() && t[at] == '.') {
    double scale = 0.1;
    ++at;
    const std::size_t begin = at;
    while (at < t.size() && t[at] >= '0' && t[at] <= '9') {
      frac += (t[at] - '0') * scale;
      scale /= 10;
      ++at;
    }
    if (at == begin) return std::nullopt;
  }
  int offset_s = 0;
  if (at < t.size() && (t[at] == 'Z' || t[at] == 'z')) {
    ++at;
  } else if (at < t.size() && (t[at] == '+' || t[at] == '-')) {
    int oh, om;
    if (!digits(at + 1, 2, oh) || at + 3 >= t.size() || t[at + 3] != ':' || !digits(at + 4, 2, om)) return std::nullopt;
    offset_s = (oh * 3600 + om * 60) * (t[at] == '-' ? -1 : 1);
    at += 6;
  } else {
    return std::nullopt;
  }
  if (at != t.size()) return std::nullopt;
  const auto base = sys_days(ymd).time_since_epoch();
  return double(duration_cast<seconds>(base).count()) + h * 3600.0 + m * 60.0 + s + frac - offset_s;
}

}  // namespace accrue::storage
