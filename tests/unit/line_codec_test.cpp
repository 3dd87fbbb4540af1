#include <catch2/catch.hpp>

#include <random>

#include "protocol/line_codec.hpp"

using namespace accrue::protocol;

namespace {

std::span<const std::uint8_t> bytes_of(const std::string& s) {
  return {reinterpret_cast<const std::uint8_t*>(s.data()), s.size()};
}

std::vector<Message> decode_all(const std::string& text, LineDecoder& d, std::size_t chunk = 1 << 20) {
  std::vector<Message> out;
  for (std::size_t at = 0; at < text.size(); at += chunk) d.feed(bytes_of(text.substr(at, chunk)), out);
  return out;
}

void check_invariant(const LineDecoder& d) {
  const auto& c = d.counters();
  CHECK(c.bytes_in == c.accepted_bytes + c.discarded_bytes + d.buffered());
}

}  // namespace

TEST_CASE("line codec: every message type round-trips, with and without checksums", "[protocol][lines]") {
  BoardIdentity id;
  id.board_serial = 9;
  id.channel_count = 4;
  id.firmware_version = 0x0203;
  id.full_scale_v = 2.5;
  id.sample_period_s = 1.0 / 3.0;  // not exact in decimal: %.17g must round-trip it
  id.capabilities = 5;
  id.r1_ohm = 100e3;
  id.c_farad = 4.7e-9;
  id.r2_ohm = 1e7;
  SampleBlock b;
  b.first_index = 18446744073709551000ull;
  b.channel_count = 4;
  b.status = status_bit::reset_active | status_bit::overload;
  b.samples_per_channel = 3;
  b.codes = {-8388608, 8388607, 0, -1, 1, 2, 3, 4, 5, 6, 7, 8};
  const std::vector<Message> messages = {id, b, BoardEvent{EventKind::overload, 255, 77, -3}, CommandAck{65535, AckStatus::bad_argument},
                                         BoardCommand{7, CommandOp::set_sample_period, 500}};
  for (bool crc : {false, true}) {
    std::string text;
    for (const auto& m : messages) text += encode_line(m, crc);
    LineDecoder d;
    const auto out = decode_all(text, d);
    CHECK(out == messages);  // the three sample lines merge back into one block
    CHECK(d.counters().lines_ok == 7);
    check_invariant(d);
    // Fed in 5-byte pieces, lines finish in different feed() calls and are not merged.
    LineDecoder small;
    const auto pieces = decode_all(text, small, 5);
    CHECK(pieces.size() == 7);
    CHECK(std::get<SampleBlock>(pieces[3]).codes == std::vector<std::int32_t>{5, 6, 7, 8});
    check_invariant(small);
  }
}

TEST_CASE("line codec: comments, CRLF and a bad checksum", "[protocol][lines]") {
  const std::string good = encode_line(CommandAck{3, AckStatus::ok}, true);
  std::string bad = good;
  bad[4] = '4';  // "ack 4 ..." under the checksum of "ack 3 ..."
  const std::string text = "# hello\r\n\n   # indented comment\n" + bad + "ack 5 1\r\n";
  LineDecoder d;
  const auto out = decode_all(text, d);
  REQUIRE(out.size() == 1);
  CHECK(std::get<CommandAck>(out[0]) == CommandAck{5, AckStatus::unknown_command});
  CHECK(d.counters().comments == 3);
  CHECK(d.counters().bad_checksum == 1);
  CHECK(d.counters().discarded_bytes == bad.size());
  check_invariant(d);
}

TEST_CASE("line codec: malformed lines are dropped whole and counted", "[protocol][lines]") {
  const std::vector<std::string> bad = {
      "id 1 2 3\n",              // too few fields
      "id 1 2 0 24 10 0.001\n",  // zero channels
      "12 8388608\n",            // code out of 24-bit range
      "-5 1 2\n",                // negative index
      "12\n",                    // no codes
      "ev 9 0 1 1\n",            // unknown event kind
      "cmd 1 6 0\n",             // unknown operation
      "12 1 s\n",                // empty status
      "hello world\n",
  };
  std::string text;
  std::size_t bad_bytes = 0;
  for (const auto& l : bad) {
    text += l;
    bad_bytes += l.size();
  }
  text += "12 1 2\n";
  LineDecoder d;
  const auto out = decode_all(text, d);
  REQUIRE(out.size() == 1);
  CHECK(std::get<SampleBlock>(out[0]).codes == std::vector<std::int32_t>{1, 2});
  CHECK(d.counters().bad_lines == bad.size());
  CHECK(d.counters().discarded_bytes == bad_bytes);
  check_invariant(d);
}

TEST_CASE("line codec: an oversize line is skipped to its end and the buffer stays bounded", "[protocol][lines]") {
  LineDecoder d;
  std::vector<Message> out;
  const std::string junk(1000, '7');
  for (int i = 0; i < 20; ++i) {
    d.feed(bytes_of(junk), out);
    REQUIRE(d.buffered() <= kMaxLineBytes);
  }
  d.feed(bytes_of("\n1 2\n"), out);
  REQUIRE(out.size() == 1);
  CHECK(d.counters().oversize_lines == 1);
  CHECK(d.counters().discarded_bytes == 20001);
  check_invariant(d);
}

TEST_CASE("line codec: sample lines merge only when contiguous and of equal status", "[protocol][lines]") {
  LineDecoder d;
  const auto out = decode_all("1 5\n2 6\n3 7 s1\n5 8 s1\n6 9 s1\n6 1 2\n", d);
  REQUIRE(out.size() == 4);
  CHECK(std::get<SampleBlock>(out[0]).samples_per_channel == 2);  // 1, 2
  CHECK(std::get<SampleBlock>(out[1]).samples_per_channel == 1);  // 3 (status changed)
  CHECK(std::get<SampleBlock>(out[2]).samples_per_channel == 2);  // 5, 6 (index jump starts a block)
  CHECK(std::get<SampleBlock>(out[3]).channel_count == 2);
}

TEST_CASE("line codec: resynchronises after random garbage at the next line end", "[protocol][lines]") {
  std::mt19937_64 rng(7);  // fixed seed: deterministic
  std::uniform_int_distribution<int> byte(0x20, 0x7E), len(1, 80);
  std::string text;
  std::size_t garbage = 0, sent = 0;
  for (int i = 0; i < 300; ++i) {
    std::string g = "~";  // '~' never starts a valid line, so the garbage line always fails
    for (int k = len(rng); k > 0; --k) g.push_back(char(byte(rng)));
    g += "\n";
    text += g;
    garbage += g.size();
    text += encode_line(BoardEvent{EventKind::board_fault, 1, std::uint64_t(i), i}, true);
    ++sent;
  }
  LineDecoder d;
  const auto out = decode_all(text, d, 61);
  CHECK(out.size() == sent);
  CHECK(d.counters().discarded_bytes == garbage);
  CHECK(d.counters().bad_lines + d.counters().bad_checksum == 300);
  check_invariant(d);
}
