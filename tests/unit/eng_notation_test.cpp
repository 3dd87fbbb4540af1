#include <catch2/catch.hpp>

#include <string>

#include "tools/accrue/eng_notation.hpp"

using accrue::client::parse_engineering;
using Catch::Matchers::WithinRel;

namespace {
double value_of(const std::string& s, const std::string& unit = {}) {
  const auto v = parse_engineering(s, unit);
  INFO(s << ": " << v.error);
  REQUIRE(v.ok);
  return v.value;
}
}  // namespace

TEST_CASE("eng_notation: every SI prefix from p to G", "[plan][eng]") {
  // SI Brochure (BIPM, 9th ed.), table 7: p 1e-12, n 1e-9, µ 1e-6, m 1e-3, k 1e3, M 1e6, G 1e9.
  CHECK_THAT(value_of("2p"), WithinRel(2e-12, 1e-15));
  CHECK_THAT(value_of("2n"), WithinRel(2e-9, 1e-15));
  CHECK_THAT(value_of("2u"), WithinRel(2e-6, 1e-15));
  CHECK_THAT(value_of("2\xC2\xB5"), WithinRel(2e-6, 1e-15));  // µ MICRO SIGN
  CHECK_THAT(value_of("2\xCE\xBC"), WithinRel(2e-6, 1e-15));  // μ GREEK SMALL LETTER MU
  CHECK_THAT(value_of("2m"), WithinRel(2e-3, 1e-15));
  CHECK_THAT(value_of("2"), WithinRel(2.0, 1e-15));
  CHECK_THAT(value_of("2k"), WithinRel(2e3, 1e-15));
  CHECK_THAT(value_of("2K"), WithinRel(2e3, 1e-15));
  CHECK_THAT(value_of("2M"), WithinRel(2e6, 1e-15));
  CHECK_THAT(value_of("2G"), WithinRel(2e9, 1e-15));
}

TEST_CASE("eng_notation: decimals, the prefix as decimal point and units", "[plan][eng]") {
  CHECK_THAT(value_of("100k"), WithinRel(100e3, 1e-15));
  CHECK_THAT(value_of("4.7n"), WithinRel(4.7e-9, 1e-15));
  // IEC 60062 letter-and-digit code: the multiplier letter stands for the decimal point.
  CHECK_THAT(value_of("1M2"), WithinRel(1.2e6, 1e-15));
  CHECK_THAT(value_of("4k7"), WithinRel(4.7e3, 1e-15));
  CHECK_THAT(value_of("4n7"), WithinRel(4.7e-9, 1e-15));
  CHECK_THAT(value_of("4R7"), WithinRel(4.7, 1e-15));
  CHECK_THAT(value_of("2p05"), WithinRel(2.05e-12, 1e-15));
  CHECK_THAT(value_of("1e-9"), WithinRel(1e-9, 1e-15));
  CHECK_THAT(value_of("-1.5m"), WithinRel(-1.5e-3, 1e-15));
  CHECK_THAT(value_of("+12"), WithinRel(12.0, 1e-15));
  CHECK_THAT(value_of(" 10M "), WithinRel(10e6, 1e-15));
  CHECK_THAT(value_of("4.7nF", "F"), WithinRel(4.7e-9, 1e-15));
  CHECK_THAT(value_of("5pA", "A"), WithinRel(5e-12, 1e-15));
  CHECK_THAT(value_of("12V", "V"), WithinRel(12.0, 1e-15));
  CHECK_THAT(value_of("1M2\xCE\xA9", "\xCE\xA9"), WithinRel(1.2e6, 1e-15));  // Ω
}

TEST_CASE("eng_notation: bad text gets an error that names it", "[plan][eng]") {
  for (const char* bad : {"", "k", "abc", "4.7x", "1.5k2", "1kk", "4.7nF", "1e999", "nan", "1 2"}) {
    const auto v = parse_engineering(bad);
    INFO(bad);
    CHECK_FALSE(v.ok);
    CHECK(v.error.find('"' + std::string(bad) + '"') != std::string::npos);
  }
  CHECK_FALSE(parse_engineering("4.7nA", "F").ok);
}
