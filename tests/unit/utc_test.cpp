#include <catch2/catch.hpp>

#include <algorithm>
#include <string>
#include <vector>

#include "storage/utc.hpp"

using accrue::storage::parse_rfc3339;
using accrue::storage::rfc3339_utc;

TEST_CASE("utc: Unix seconds as RFC 3339 UTC text with milliseconds", "[storage][utc]") {
  // 1e9 s is 2001-09-09T01:46:40Z (from memory; Python's datetime.fromtimestamp(1e9, timezone.utc) agrees).
  CHECK(rfc3339_utc(1e9) == "2001-09-09T01:46:40.000Z");
  CHECK(rfc3339_utc(1e9 + 0.25) == "2001-09-09T01:46:40.250Z");
  // A fraction that rounds up to the next second carries into it.
  CHECK(rfc3339_utc(1e9 + 59.9996) == "2001-09-09T01:47:40.000Z");
  // 951782400 is 2000-02-29, the leap day of a century divisible by 400 (Python's datetime agrees).
  CHECK(rfc3339_utc(951782400.0) == "2000-02-29T00:00:00.000Z");
  const auto back = parse_rfc3339(rfc3339_utc(1e9 + 0.25));
  REQUIRE(back);
  CHECK(*back == Approx(1e9 + 0.25));
}

TEST_CASE("utc: the text sorts as the times do", "[storage][utc]") {
  // The store compares these as text (events' host_utc against query bounds).
  const std::vector<double> times = {1e9, 1e9 + 0.001, 1e9 + 0.25, 1e9 + 0.999, 1e9 + 1.0, 1e9 + 10.0, 1e9 + 86400.5};
  std::vector<std::string> texts;
  for (double t : times) texts.push_back(rfc3339_utc(t));
  CHECK(std::is_sorted(texts.begin(), texts.end()));
  CHECK(std::adjacent_find(texts.begin(), texts.end()) == texts.end());
}
