#include <catch2/catch.hpp>

#include <string_view>

#include "protocol/crc32.hpp"

using accrue::protocol::crc32_iso_hdlc;

static std::uint32_t crc_of(std::string_view s) {
  return crc32_iso_hdlc({reinterpret_cast<const std::uint8_t*>(s.data()), s.size()});
}

TEST_CASE("crc32: catalogue check value", "[protocol][crc]") {
  // Source: Greg Cook, "Catalogue of parametrised CRC algorithms" (reveng),
  // entry CRC-32/ISO-HDLC: check = 0xCBF43926 over ASCII "123456789".
  CHECK(crc_of("123456789") == 0xCBF43926u);
  CHECK(accrue::protocol::kCrc32CheckValue == 0xCBF43926u);
}

TEST_CASE("crc32: empty input and a single bit flip", "[protocol][crc]") {
  // CRC-32/ISO-HDLC of no bytes is init ^ xorout = 0 (follows from the catalogue parameters).
  CHECK(crc_of("") == 0u);
  // A CRC detects every single-bit error (property of any CRC with a poly of more than one term).
  std::string s = "accrue frame payload";
  const auto good = crc_of(s);
  for (std::size_t i = 0; i < s.size() * 8; ++i) {
    std::string t = s;
    t[i / 8] = char(t[i / 8] ^ (1 << (i % 8)));
    REQUIRE(crc_of(t) != good);
  }
}
