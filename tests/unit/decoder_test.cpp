#include <catch2/catch.hpp>

#include <random>

#include "protocol/decoder.hpp"
#include "protocol/encoder.hpp"
#include "protocol/frame.hpp"

using namespace accrue::protocol;

namespace {

SampleBlock make_block(std::uint64_t first, std::uint16_t n, std::uint8_t channels = 1) {
  SampleBlock b;
  b.first_index = first;
  b.channel_count = channels;
  b.samples_per_channel = n;
  for (int i = 0; i < n * channels; ++i) b.codes.push_back((i * 7919) % 8388607 - 4194304);
  return b;
}

std::vector<Message> decode_all(const std::vector<std::uint8_t>& bytes, Decoder& d, std::size_t chunk = 1 << 20) {
  std::vector<Message> out;
  for (std::size_t at = 0; at < bytes.size(); at += chunk) {
    const std::size_t n = std::min(chunk, bytes.size() - at);
    d.feed(std::span(bytes).subspan(at, n), out);
  }
  return out;
}

}  // namespace

TEST_CASE("decoder: every message type round-trips through the encoder", "[protocol][decoder]") {
  BoardIdentity id;
  id.board_serial = 77;
  id.channel_count = 4;
  id.r1_ohm = 100e3;
  id.c_farad = 4.7e-9;
  id.capabilities = capability_bit::reset_switch | capability_bit::bipolar_adc;
  const std::vector<Message> messages = {
      id,
      make_block(123456789012ull, 100, 4),
      BoardEvent{EventKind::reset_end, 2, 99, -5000},
      CommandAck{513, AckStatus::busy},
      BoardCommand{9, CommandOp::zero_relay, 1},
  };
  std::vector<std::uint8_t> bytes;
  for (const auto& m : messages) REQUIRE(encode_into(m, bytes));
  Decoder d;
  const auto out = decode_all(bytes, d, 7);  // odd chunking: frames split anywhere
  REQUIRE(out == messages);
  CHECK(d.counters().frames_ok == messages.size());
  CHECK(d.counters().discarded_bytes == 0);
}

TEST_CASE("decoder: the 24-bit code range survives exactly", "[protocol][decoder]") {
  SampleBlock b;
  b.codes = {-8388608, -1, 0, 1, 8388607};
  b.samples_per_channel = 5;
  Decoder d;
  const auto out = decode_all(encode(b), d);
  REQUIRE(out.size() == 1);
  CHECK(std::get<SampleBlock>(out[0]).codes == b.codes);
}

TEST_CASE("decoder: resynchronises after random garbage and counts every byte", "[protocol][decoder]") {
  std::mt19937_64 rng(12345);  // fixed seed: deterministic
  std::uniform_int_distribution<int> byte(0, 255), len(0, 300);
  std::vector<std::uint8_t> stream;
  std::vector<Message> sent;
  std::size_t garbage = 0;
  for (int i = 0; i < 400; ++i) {
    const int n = len(rng);
    for (int k = 0; k < n; ++k) {
      // Garbage without the first sync byte, so no false frame can start inside it.
      std::uint8_t b = std::uint8_t(byte(rng));
      if (b == frame::kSync0) b = 0x00;
      stream.push_back(b);
    }
    garbage += std::size_t(n);
    Message m = make_block(std::uint64_t(i) * 50, 50);
    sent.push_back(m);
    encode_into(m, stream);
  }
  Decoder d;
  const auto out = decode_all(stream, d, 333);
  CHECK(out == sent);
  CHECK(d.counters().discarded_bytes == garbage);
  CHECK(d.counters().bad_crc == 0);
}

TEST_CASE("decoder: a corrupted frame is dropped and the next one still decodes", "[protocol][decoder]") {
  std::vector<std::uint8_t> a = encode(make_block(0, 10)), b = encode(make_block(10, 10));
  SECTION("payload byte flipped: bad CRC") {
    a[20] ^= 0x10;
  }
  SECTION("length field corrupted upward: waits, then the CRC fails on rescan") {
    a[4] = 0xFF;
    a[5] = 0x00;
  }
  SECTION("length field over the maximum: oversize") {
    a[5] = 0x20;
  }
  std::vector<std::uint8_t> stream = a;
  stream.insert(stream.end(), b.begin(), b.end());
  // A trailing good frame lets a too-long length run out of bytes and fail its CRC.
  for (int i = 0; i < 8; ++i) {
    auto c = encode(make_block(20 + 10 * std::uint64_t(i), 10));
    stream.insert(stream.end(), c.begin(), c.end());
  }
  Decoder d;
  const auto out = decode_all(stream, d);
  REQUIRE(out.size() == 9);
  CHECK(std::get<SampleBlock>(out[0]).first_index == 10);
  CHECK(d.counters().discarded_bytes == a.size());
  CHECK(d.counters().bad_crc + d.counters().oversize >= 1);
}

TEST_CASE("decoder: never buffers more than one maximum frame", "[protocol][decoder]") {
  Decoder d;
  std::vector<Message> out;
  std::vector<std::uint8_t> header = {frame::kSync0, frame::kSync1, frame::kVersion, 0x02, 0x00, 0x10};
  d.feed(header, out);
  std::vector<std::uint8_t> filler(3000, 0x55);
  for (int i = 0; i < 10; ++i) {
    d.feed(filler, out);
    REQUIRE(d.buffered() <= frame::kMaxFrame);
  }
  CHECK(out.empty());
}
