// Round-trip and rejection tests of the raw-block codec (storage/block_codec.hpp).
#include <catch2/catch.hpp>

#include <cstdint>
#include <limits>
#include <random>
#include <vector>

#include "storage/block_codec.hpp"

using namespace accrue::storage;

namespace {

std::vector<std::int32_t> round_trip(const std::vector<std::int32_t>& codes, int channels) {
  std::vector<std::uint8_t> bytes;
  block_codec::encode(codes, channels, bytes);
  std::vector<std::int32_t> back;
  const Status s = block_codec::decode(block_codec::kDeltaZigzagVarint, bytes, channels, codes.size(), back);
  REQUIRE(s.ok());
  return back;
}

}  // namespace

TEST_CASE("block_codec: random blocks of every shape round-trip exactly") {
  std::mt19937_64 rng(20261201);
  for (int trial = 0; trial < 2000; ++trial) {
    const int channels = 1 + int(rng() % 8);
    const std::size_t samples = rng() % 300;
    std::vector<std::int32_t> codes(samples * std::size_t(channels));
    const int kind = trial % 4;
    std::int64_t walk = 0;
    for (auto& c : codes) {
      switch (kind) {
        case 0:  // any 32-bit value
          c = std::int32_t(std::uint32_t(rng()));
          break;
        case 1:  // any 24-bit ADC code
          c = std::int32_t(rng() % (1u << 24)) - (1 << 23);
          break;
        case 2:  // a slow random walk, like an integrator ramp with noise
          walk += std::int64_t(rng() % 33) - 16;
          c = std::int32_t(walk);
          break;
        default:  // small values near zero of either sign
          c = std::int32_t(rng() % 5) - 2;
      }
    }
    REQUIRE(round_trip(codes, channels) == codes);
  }
}

TEST_CASE("block_codec: adversarial extremes round-trip, including the widest deltas") {
  constexpr std::int32_t lo = std::numeric_limits<std::int32_t>::min();
  constexpr std::int32_t hi = std::numeric_limits<std::int32_t>::max();
  const std::vector<std::vector<std::int32_t>> cases = {
      {},
      {0},
      {lo},
      {hi},
      {lo, hi, lo, hi, lo, hi},  // the delta hi - lo = 2^32 - 1 needs 33 bits
      {hi, lo, hi, lo},
      {-1, 0, -1, 0},
      {-(1 << 23), (1 << 23) - 1, -(1 << 23)},  // 24-bit full-scale swings
      std::vector<std::int32_t>(4096, hi),
  };
  for (int channels : {1, 2, 3}) {
    for (const auto& c : cases) {
      if (c.size() % std::size_t(channels) != 0) continue;
      CHECK(round_trip(c, channels) == c);
    }
  }
}

TEST_CASE("block_codec: the encoding is the documented delta, zigzag and LEB128 bytes") {
  // Worked by hand from the definitions (zigzag: Protocol Buffers encoding
  // guide; LEB128: DWARF 5, section 7.6): codes 0, -1, 1, 64 on one channel
  // give deltas 0, -1, 2, 63 -> zigzag 0, 1, 4, 126 -> one byte each;
  // 300 - 64 = 236 -> zigzag 472 = 0b1_1101_1000 -> 0xD8 0x03.
  std::vector<std::uint8_t> bytes;
  block_codec::encode(std::vector<std::int32_t>{0, -1, 1, 64, 300}, 1, bytes);
  CHECK(bytes == std::vector<std::uint8_t>{0x00, 0x01, 0x04, 0x7E, 0xD8, 0x03});
  // Two channels: each differs from its own previous code.
  bytes.clear();
  block_codec::encode(std::vector<std::int32_t>{100, -100, 101, -101}, 2, bytes);
  CHECK(bytes == std::vector<std::uint8_t>{0xC8, 0x01, 0xC7, 0x01, 0x02, 0x01});
}

TEST_CASE("block_codec: malformed bytes are rejected with a reason, never over-read") {
  std::vector<std::int32_t> out;
  std::vector<std::uint8_t> good;
  block_codec::encode(std::vector<std::int32_t>{5, 70000, -3}, 1, good);
  // Truncated: every proper prefix fails.
  for (std::size_t n = 0; n < good.size(); ++n) {
    std::vector<std::uint8_t> cut(good.begin(), good.begin() + std::ptrdiff_t(n));
    const Status s = block_codec::decode(block_codec::kDeltaZigzagVarint, cut, 1, 3, out);
    CHECK_FALSE(s.ok());
  }
  // Trailing bytes.
  auto longer = good;
  longer.push_back(0);
  Status s = block_codec::decode(block_codec::kDeltaZigzagVarint, longer, 1, 3, out);
  CHECK_FALSE(s.ok());
  CHECK(s.message.find("trailing") != std::string::npos);
  // A varint of eleven groups is longer than 64 bits.
  std::vector<std::uint8_t> overlong(10, 0xFF);
  overlong.push_back(0x01);
  s = block_codec::decode(block_codec::kDeltaZigzagVarint, overlong, 1, 1, out);
  CHECK_FALSE(s.ok());
  CHECK(s.message.find("64 bits") != std::string::npos);
  // A delta that leaves the 32-bit range.
  std::vector<std::uint8_t> big;
  block_codec::encode(std::vector<std::int32_t>{std::numeric_limits<std::int32_t>::max()}, 1, big);
  big.push_back(0x02);  // +1 more
  s = block_codec::decode(block_codec::kDeltaZigzagVarint, big, 1, 2, out);
  CHECK_FALSE(s.ok());
  CHECK(s.message.find("range") != std::string::npos);
  // A count the bytes cannot hold, and an unknown encoding.
  CHECK_FALSE(block_codec::decode(block_codec::kDeltaZigzagVarint, good, 1, 1u << 30, out).ok());
  CHECK_FALSE(block_codec::decode(7, good, 1, 3, out).ok());
  // Random garbage never crashes and either decodes to the count or fails.
  std::mt19937 rng(7);
  for (int trial = 0; trial < 3000; ++trial) {
    std::vector<std::uint8_t> junk(rng() % 40);
    for (auto& b : junk) b = std::uint8_t(rng());
    const std::size_t count = rng() % 20;
    const Status r = block_codec::decode(block_codec::kDeltaZigzagVarint, junk, 1 + int(rng() % 3), count, out);
    if (r.ok()) CHECK(out.size() == count);
  }
}

TEST_CASE("block_codec: version 1 packed 24-bit blocks still decode") {
  // Little-endian two's complement: 0x7FFFFF = 8388607, 0x800000 = -8388608, 0xFFFFFF = -1.
  const std::vector<std::uint8_t> packed = {0xFF, 0xFF, 0x7F, 0x00, 0x00, 0x80, 0xFF, 0xFF, 0xFF};
  std::vector<std::int32_t> out;
  REQUIRE(block_codec::decode(block_codec::kPacked24, packed, 1, 3, out).ok());
  CHECK(out == std::vector<std::int32_t>{8388607, -8388608, -1});
  CHECK_FALSE(block_codec::decode(block_codec::kPacked24, packed, 1, 4, out).ok());
}
