#include "daemon/chain/si_value.hpp"

#include <charconv>
#include <cmath>

namespace accrue::chain {
namespace {

struct Prefix {
  std::string_view symbol;
  double factor;
};
constexpr Prefix prefixes[] = {{"f", 1e-15}, {"p", 1e-12}, {"n", 1e-9}, {"u", 1e-6}, {"µ", 1e-6}, {"m", 1e-3},
                               {"k", 1e3},   {"M", 1e6},   {"G", 1e9},  {"T", 1e12}};

std::string_view trim(std::string_view s) {
  while (!s.empty() && (s.front() == ' ' || s.front() == '\t')) s.remove_prefix(1);
  while (!s.empty() && (s.back() == ' ' || s.back() == '\t')) s.remove_suffix(1);
  return s;
}

bool is_area(std::string_view u) { return u == "m²" || u == "m2"; }

}  // namespace

SiParse parse_si_value(std::string_view text, const std::vector<std::string_view>& units) {
  SiParse r;
  const std::string_view want = units.empty() ? std::string_view{} : units.front();
  std::string_view s = trim(text);
  double number = 0.0;
  const auto [end, ec] = std::from_chars(s.data(), s.data() + s.size(), number);
  if (ec != std::errc{} || end == s.data()) {
    r.error = "\"" + std::string(text) + "\" does not start with a number";
    return r;
  }
  std::string_view unit = trim(std::string_view(end, std::size_t(s.data() + s.size() - end)));
  if (!std::isfinite(number)) {
    r.error = "\"" + std::string(text) + "\" is not a finite number";
    return r;
  }
  if (unit.empty()) {
    r.ok = true;
    r.value = number;
    return r;
  }
  for (std::string_view u : units) {
    if (unit == u) {
      r.ok = true;
      r.value = number;
      return r;
    }
    if (is_area(u)) {
      if (unit == "cm²" || unit == "cm2") return {true, number * 1e-4, {}};
      if (unit == "mm²" || unit == "mm2") return {true, number * 1e-6, {}};
      continue;
    }
    for (const Prefix& p : prefixes) {
      if (unit.size() == p.symbol.size() + u.size() && unit.substr(0, p.symbol.size()) == p.symbol &&
          unit.substr(p.symbol.size()) == u) {
        r.ok = true;
        r.value = number * p.factor;
        return r;
      }
    }
  }
  r.error = "expected a value in " + std::string(want) + ", got \"" + std::string(text) + "\" (unit \"" +
            std::string(unit) + "\" is not " + std::string(want) + ")";
  return r;
}

}  // namespace accrue::chain
