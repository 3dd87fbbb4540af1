#pragma once
// Reads a number written in engineering notation, as on schematics and parts
// lists: a decimal number with an optional SI prefix (p n u µ m k M G; K is
// taken as k), the prefix optionally standing for the decimal point as in
// IEC 60062 ("1M2" = 1.2e6, "4n7" = 4.7e-9, "4R7" = 4.7), plain exponents
// ("1e-9"), and an optional trailing unit symbol that the caller names
// ("4.7nF" with unit "F"). Pure: no locale, no state, no exceptions.
#include <string>
#include <string_view>

namespace accrue::client {

struct EngValue {
  bool ok = false;
  double value = 0.0;
  std::string error;  // when !ok: what is wrong, naming the text
};

EngValue parse_engineering(std::string_view text, std::string_view unit = {});

}  // namespace accrue::client
