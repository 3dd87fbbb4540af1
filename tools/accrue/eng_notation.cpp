#include "tools/accrue/eng_notation.hpp"

#include <charconv>
#include <cmath>

namespace accrue::client {
namespace {

struct Prefix {
  std::string_view symbol;
  double factor;
};

// Longest symbols first so that the two-byte micro signs match whole.
constexpr Prefix kPrefixes[] = {
    {"\xC2\xB5", 1e-6},  // U+00B5 MICRO SIGN
    {"\xCE\xBC", 1e-6},  // U+03BC GREEK SMALL LETTER MU
    {"p", 1e-12}, {"n", 1e-9}, {"u", 1e-6}, {"m", 1e-3}, {"R", 1.0}, {"k", 1e3},
    {"K", 1e3},   {"M", 1e6},  {"G", 1e9},
};

const Prefix* prefix_at(std::string_view s) {
  for (const Prefix& p : kPrefixes)
    if (s.substr(0, p.symbol.size()) == p.symbol) return &p;
  return nullptr;
}

EngValue fail(std::string_view text, std::string_view why) {
  return {false, 0.0, "cannot read \"" + std::string(text) + "\" as a value: " + std::string(why)};
}

bool all_digits(std::string_view s) {
  for (char c : s)
    if (c < '0' || c > '9') return false;
  return true;
}

}  // namespace

EngValue parse_engineering(std::string_view text, std::string_view unit) {
  std::string_view s = text;
  while (!s.empty() && (s.front() == ' ' || s.front() == '\t')) s.remove_prefix(1);
  while (!s.empty() && (s.back() == ' ' || s.back() == '\t')) s.remove_suffix(1);
  if (s.empty()) return fail(text, "empty");
  if (!unit.empty() && s.size() > unit.size() && s.substr(s.size() - unit.size()) == unit)
    s.remove_suffix(unit.size());

  double mantissa = 0.0;
  const char* first = s.data();
  const char* last = s.data() + s.size();
  if (*first == '+') ++first;  // from_chars takes a minus, not a plus
  auto [ptr, ec] = std::from_chars(first, last, mantissa, std::chars_format::general);
  if (ec != std::errc() || ptr == first) return fail(text, "no number at the start");
  std::string_view rest(ptr, std::size_t(last - ptr));
  if (rest.empty()) {
    if (!std::isfinite(mantissa)) return fail(text, "not a finite number");
    return {true, mantissa, {}};
  }
  const Prefix* p = prefix_at(rest);
  if (!p) return fail(text, "unknown suffix \"" + std::string(rest) + "\" (prefixes p n u µ m k M G, or R)");
  rest.remove_prefix(p->symbol.size());
  double value = mantissa * p->factor;
  if (!rest.empty()) {
    // IEC 60062 style: the prefix stands for the decimal point ("4k7").
    const std::string_view whole(first, std::size_t(ptr - first));
    if (!all_digits(rest) || !all_digits(whole.front() == '-' ? whole.substr(1) : whole))
      return fail(text, "unexpected \"" + std::string(rest) + "\" after the prefix");
    double fraction = 0.0;
    const std::string decimal = "0." + std::string(rest);
    std::from_chars(decimal.data(), decimal.data() + decimal.size(), fraction);
    value = (mantissa < 0 || whole.front() == '-' ? -1.0 : 1.0) * (std::fabs(mantissa) + fraction) * p->factor;
  }
  if (!std::isfinite(value)) return fail(text, "not a finite number");
  return {true, value, {}};
}

}  // namespace accrue::client
