// The client's CSV export and SVG plot (tools/accrue/csv_export.hpp,
// tools/accrue/window_svg.hpp), on a hand-made window reply.
#include <catch2/catch.hpp>

#include <cmath>
#include <string>

#include "tools/accrue/csv_export.hpp"
#include "tools/accrue/window_svg.hpp"

using accrue::client::csv_field;
using accrue::client::parse_utc;
using accrue::client::PlotOptions;
using accrue::client::window_csv;
using accrue::client::window_svg;
using nlohmann::json;

namespace {

json sample_window() {
  json points = json::array();
  for (int i = 0; i < 4; ++i) {
    const double total = 1e-9 * i + 1.0 / 3.0 * 1e-12;
    points.push_back({{"index", 1000 * i}, {"utc", "2026-12-01T23:13:1" + std::to_string(7 + i) + ".879Z"},
                      {"samples", 1000}, {"mean_v", 0.1 * i}, {"min_v", 0.0}, {"max_v", 0.2 * i}, {"last_v", 0.15 * i},
                      {"delta", i ? 1e-9 : 0.0}, {"total", total}, {"total_u", 1e-13}, {"rate", i ? 1e-9 : 0.0}});
  }
  return {{"run_id", 1}, {"channel", 0}, {"select", "all"}, {"quantity", "charge"}, {"unit", "C"},
          {"rate_unit", "C/s"}, {"sample_period_s", 0.001}, {"bucket_samples", 1000}, {"points", points},
          {"continuation", nullptr}};
}

}  // namespace

TEST_CASE("client: csv_field quotes only what RFC 4180 requires, doubling inner quotes") {
  // RFC 4180 section 2, rules 6 and 7, and its example "aaa","b""bb","ccc".
  CHECK(csv_field("aaa") == "aaa");
  CHECK(csv_field("b\"bb") == "\"b\"\"bb\"");
  CHECK(csv_field("a,b") == "\"a,b\"");
  CHECK(csv_field("line\r\nbreak") == "\"line\r\nbreak\"");
  CHECK(csv_field("") == "");
}

TEST_CASE("client: window_csv writes a header with units, CRLF records and round-trip numbers") {
  const std::string csv = window_csv(sample_window());
  const std::string header = csv.substr(0, csv.find("\r\n"));
  CHECK(header ==
        "utc (RFC 3339),index (sample),samples,mean (V),min (V),max (V),last (V),delta (C),total (C),total_u (C),"
        "rate (C/s)");
  // Every record ends in CRLF, and no bare LF appears (RFC 4180 section 2, rule 1).
  std::size_t records = 0;
  for (std::size_t i = 0; i < csv.size(); ++i) {
    if (csv[i] == '\n') {
      REQUIRE(i > 0);
      CHECK(csv[i - 1] == '\r');
      ++records;
    }
  }
  CHECK(records == 5);
  CHECK(csv.substr(csv.size() - 2) == "\r\n");
  // 17 significant digits read back to the same double.
  const std::string second = csv.substr(csv.find("\r\n") + 2);
  const std::string row1 = csv.substr(csv.find("\r\n", csv.find("\r\n") + 2) + 2);
  const auto field = [](const std::string& row, int k) {
    std::size_t at = 0;
    for (int i = 0; i < k; ++i) at = row.find(',', at) + 1;
    return row.substr(at, row.find_first_of(",\r", at) - at);
  };
  CHECK(field(second, 0) == "2026-12-01T23:13:17.879Z");
  CHECK(std::stod(field(row1, 8)) == 1e-9 * 1 + 1.0 / 3.0 * 1e-12);
  CHECK(field(row1, 1) == "1000");
}

TEST_CASE("client: window_csv keeps only the columns the reply's select carries") {
  json w = sample_window();
  for (auto& p : w["points"]) p = {{"index", p["index"]}, {"utc", p["utc"]}, {"samples", p["samples"]}, {"total", p["total"]}, {"total_u", p["total_u"]}};
  const std::string csv = window_csv(w);
  CHECK(csv.substr(0, csv.find("\r\n")) == "utc (RFC 3339),index (sample),samples,total (C),total_u (C)");
}

TEST_CASE("client: parse_utc reads the API's RFC 3339 UTC text") {
  // Reference values from Python's datetime(..., tzinfo=timezone.utc).timestamp().
  CHECK(parse_utc("2026-12-01T23:13:17.879Z") == Approx(1796166797.879).margin(1e-6));
  CHECK(parse_utc("2000-02-29T00:00:00Z") == 951782400.0);
  CHECK(std::isnan(parse_utc("2026-02-30T00:00:00Z")));
  CHECK(std::isnan(parse_utc("yesterday")));
}

TEST_CASE("client: window_svg draws both panels, markers and escapes text") {
  json events = json::array();
  events.push_back({{"kind", "board_reset_begin"}, {"sample_index", 1500}, {"detail", "value=0"}});
  events.push_back({{"kind", "board_zero_relay_closed"}, {"sample_index", 2000}, {"detail", ""}});
  events.push_back({{"kind", "board_zero_relay_opened"}, {"sample_index", 2500}, {"detail", ""}});
  events.push_back({{"kind", "control"}, {"sample_index", nullptr}, {"host_utc", "2026-12-01T23:13:19.000Z"},
                    {"detail", "reset <now> & \"then\""}});
  events.push_back({{"kind", "quiet_window"}, {"sample_index", 100}, {"detail", R"({"from_index":100,"to_index":900,"note":""})"}});
  PlotOptions opt;
  opt.title = "a <test> & more";
  const std::string svg = window_svg(sample_window(), events, opt);
  CHECK(svg.find("<title>a &lt;test&gt; &amp; more</title>") != std::string::npos);
  CHECK(svg.find("reset &lt;now&gt; &amp; &quot;then&quot;") != std::string::npos);
  CHECK(svg.find("<g id=\"total\">") != std::string::npos);
  CHECK(svg.find("<g id=\"rate\">") != std::string::npos);
  CHECK(svg.find("class=\"reset\"") != std::string::npos);
  CHECK(svg.find("class=\"zero-window\"") != std::string::npos);
  CHECK(svg.find("class=\"quiet-window\"") != std::string::npos);
  CHECK(svg.find("class=\"event\"") != std::string::npos);
  // Axis labels carry units with an SI prefix: totals up to 3 nC read in nC, rates of 1 nC/s in nC/s.
  CHECK(svg.find("running total (nC)") != std::string::npos);
  CHECK(svg.find("rate (nC/s)") != std::string::npos);
  CHECK(svg.find("time (UTC, from 2026-12-01)") != std::string::npos);
}
