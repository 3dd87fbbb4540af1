#pragma once
// A window (the "window" method's reply, every page merged) as CSV text that
// follows RFC 4180: one header record, CRLF after every record, a field quoted
// (inner quotes doubled) when it holds a comma, a quote, CR or LF. Times are
// the API's RFC 3339 UTC text; numbers are written with 17 significant digits
// so they read back to the same double. Each header names its unit in
// parentheses ("total (C)"). Columns present depend on the reply's `select`.
// Pure functions: no I/O.
#include <string>

#include <nlohmann/json.hpp>

namespace accrue::client {

// One field, quoted when RFC 4180 requires it.
std::string csv_field(const std::string& text);
// The whole window as CSV.
std::string window_csv(const nlohmann::json& window);

}  // namespace accrue::client
