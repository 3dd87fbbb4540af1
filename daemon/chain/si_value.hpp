#pragma once
// Parses a configured physical value: either a plain number already in the
// SI unit, or text "<number> <prefix><unit>" such as "4.7 nF", "1 GΩ",
// "2.5 pC/N". The unit must be one the caller expects; a value in the wrong
// unit is an error that names both units, so a capacitance given in ohms is
// caught at load. Prefixes (BIPM SI Brochure, 9th ed., Table 7): f p n u µ m
// k M G T. Prefixes do not apply to m² (area is given in m², cm² or mm²).
// Pure, no I/O.
#include <string>
#include <string_view>
#include <vector>

namespace accrue::chain {

struct SiParse {
  bool ok = false;
  double value = 0.0;   // in the SI unit
  std::string error;    // when !ok: why
};

// `units` lists accepted spellings of one unit (e.g. {"ohm", "Ω"}); the first
// is the one named in errors.
SiParse parse_si_value(std::string_view text, const std::vector<std::string_view>& units);

}  // namespace accrue::chain
