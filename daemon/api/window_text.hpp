#pragma once
// Serializes a window page's points straight to JSON text, with the fields a
// json::dump() of the same objects gives, in its order (keys sorted), doubles
// in their shortest round-trip form (std::to_chars) and non-finite numbers as
// null.
// Building the objects as a json tree first cost more than the store query
// itself (one map node per field); this writes each point in one pass.
#include <string>

#include "daemon/api/store_queries.hpp"

namespace accrue::daemon::api {

struct WindowFields {
  bool volts = true, total = true, quantity = true, rate = true;
};

// Appends `[{...},{...}]` for page.buckets to out.
void append_window_points(std::string& out, const WindowPage& page, double utc_at_index0, double sample_period_s,
                          WindowFields fields);

}  // namespace accrue::daemon::api
