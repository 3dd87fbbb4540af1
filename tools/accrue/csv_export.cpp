#include "tools/accrue/csv_export.hpp"

#include <cstdio>
#include <vector>

namespace accrue::client {

using nlohmann::json;

std::string csv_field(const std::string& text) {
  if (text.find_first_of(",\"\r\n") == std::string::npos) return text;
  std::string out = "\"";
  for (char c : text) {
    if (c == '"') out += '"';
    out += c;
  }
  return out + "\"";
}

namespace {

struct Column {
  const char* field;  // in each point of the reply
  std::string header;
  bool integer;
};

std::string number(const json& v, bool integer) {
  if (v.is_null()) return "";
  char buf[40];
  if (integer) std::snprintf(buf, sizeof buf, "%llu", (unsigned long long)v.get<std::uint64_t>());
  else std::snprintf(buf, sizeof buf, "%.17g", v.get<double>());
  return buf;
}

}  // namespace

std::string window_csv(const json& window) {
  const std::string unit = window.value("unit", "");
  const std::string rate_unit = window.value("rate_unit", "");
  const std::vector<Column> all = {
      {"index", "index (sample)", true},  {"samples", "samples", true},
      {"mean_v", "mean (V)", false},      {"min_v", "min (V)", false},
      {"max_v", "max (V)", false},        {"last_v", "last (V)", false},
      {"delta", "delta (" + unit + ")", false}, {"total", "total (" + unit + ")", false},
      {"total_u", "total_u (" + unit + ")", false}, {"rate", "rate (" + rate_unit + ")", false},
  };
  const json& points = window["points"];
  // The columns are those the reply's points carry (its `select`).
  std::vector<Column> cols;
  for (const auto& c : all)
    if (points.empty() || points.front().contains(c.field)) cols.push_back(c);
  std::string out = csv_field("utc (RFC 3339)");
  for (const auto& c : cols) out += "," + csv_field(c.header);
  out += "\r\n";
  for (const auto& p : points) {
    out += csv_field(p.value("utc", ""));
    for (const auto& c : cols) out += "," + csv_field(number(p.contains(c.field) ? p[c.field] : json(nullptr), c.integer));
    out += "\r\n";
  }
  return out;
}

}  // namespace accrue::client
