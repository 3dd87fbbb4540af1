#pragma once
// RFC 3339 UTC text for Unix seconds ("2026-12-01T21:52:38.125Z") and back.
#include <optional>
#include <string>
#include <string_view>

namespace accrue::storage {

std::string rfc3339_utc(double unix_seconds);
// Accepts "YYYY-MM-DDTHH:MM:SS[.frac](Z|+HH:MM|-HH:MM)"; nullopt if malformed.
std::optional<double> parse_rfc3339(std::string_view text);

}  // namespace accrue::storage
