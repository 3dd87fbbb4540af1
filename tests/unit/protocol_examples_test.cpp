// The hex and line examples of protocol/PROTOCOL.md decode to what its prose says.
// The examples are read from the document itself, so the spec and the code cannot drift apart.
#include <catch2/catch.hpp>

#include <fstream>
#include <map>
#include <sstream>
#include <string>

#include "protocol/decoder.hpp"
#include "protocol/encoder.hpp"
#include "protocol/line_codec.hpp"

using namespace accrue::protocol;

namespace {

// Fenced blocks "```<kind> <name>" ... "```" of the given kind, by name.
std::map<std::string, std::string> blocks(const std::string& kind) {
  std::ifstream in(std::string(ACCRUE_SOURCE_DIR) + "/protocol/PROTOCOL.md");
  REQUIRE(in);
  std::map<std::string, std::string> out;
  std::string line, name, body;
  bool inside = false;
  while (std::getline(in, line)) {
    if (!inside && line.rfind("```" + kind + " ", 0) == 0) {
      inside = true;
      name = line.substr(4 + kind.size());
      body.clear();
    } else if (inside && line.rfind("```", 0) == 0) {
      inside = false;
      out[name] = body;
    } else if (inside) {
      body += line + "\n";
    }
  }
  return out;
}

std::vector<std::uint8_t> hex_bytes(const std::string& text) {
  std::vector<std::uint8_t> out;
  std::istringstream s(text);
  std::string tok;
  while (s >> tok) out.push_back(std::uint8_t(std::stoul(tok, nullptr, 16)));
  return out;
}

Message decode_one(const std::string& name) {
  const auto frames = blocks("frame");
  REQUIRE(frames.count(name) == 1);
  const auto bytes = hex_bytes(frames.at(name));
  Decoder d;
  std::vector<Message> out;
  d.feed(bytes, out);
  REQUIRE(out.size() == 1);
  CHECK(d.counters().discarded_bytes == 0);
  CHECK(encode(out[0]) == bytes);  // and the encoder gives back exactly the documented bytes
  return out[0];
}

SampleBlock documented_block() {
  SampleBlock b;
  b.first_index = 1000;
  b.channel_count = 2;
  b.status = status_bit::zero_relay;
  b.samples_per_channel = 2;
  b.codes = {1, -1, 8388607, -8388608};
  return b;
}

}  // namespace

TEST_CASE("protocol examples: the document has every example the tests expect", "[protocol]") {
  const auto frames = blocks("frame");
  for (const char* n : {"command-ping", "command-zero-close", "ack-ok", "identity", "samples", "event-reset-end"})
    CHECK(frames.count(n) == 1);
  CHECK(blocks("lines").count("two-channel") == 1);
}

TEST_CASE("protocol examples: ping and zero-relay commands", "[protocol]") {
  CHECK(std::get<BoardCommand>(decode_one("command-ping")) == BoardCommand{1, CommandOp::ping, 0});
  CHECK(std::get<BoardCommand>(decode_one("command-zero-close")) == BoardCommand{2, CommandOp::zero_relay, 1});
  CHECK(std::get<CommandAck>(decode_one("ack-ok")) == CommandAck{1, AckStatus::ok});
}

TEST_CASE("protocol examples: identity of the invented board", "[protocol]") {
  const auto id = std::get<BoardIdentity>(decode_one("identity"));
  CHECK(id.board_serial == 4242);
  CHECK(id.firmware_version == 0x0102);
  CHECK(id.channel_count == 4);
  CHECK(id.adc_bits == 24);
  CHECK(id.full_scale_v == 10.0);
  CHECK(id.sample_period_s == 0.001);
  CHECK(id.capabilities == 7);
  CHECK(id.r1_ohm == 1e9);
  CHECK(id.c_farad == 1e-9);
  CHECK(id.r2_ohm == 0.0);
}

TEST_CASE("protocol examples: sample block and reset-ended event", "[protocol]") {
  CHECK(std::get<SampleBlock>(decode_one("samples")) == documented_block());
  CHECK(std::get<BoardEvent>(decode_one("event-reset-end")) == BoardEvent{EventKind::reset_end, 0, 120000, 5000});
}

TEST_CASE("protocol examples: the text-line example decodes as described", "[protocol][lines]") {
  const std::string text = blocks("lines").at("two-channel");
  LineDecoder d;
  std::vector<Message> out;
  d.feed(std::span(reinterpret_cast<const std::uint8_t*>(text.data()), text.size()), out);
  REQUIRE(out.size() == 3);
  const auto id = std::get<BoardIdentity>(out[0]);
  CHECK(id.board_serial == 4242);
  CHECK(id.firmware_version == 258);
  CHECK(id.channel_count == 2);
  CHECK(id.sample_period_s == 0.001);
  CHECK(id.capabilities == 7);
  CHECK(std::get<SampleBlock>(out[1]) == documented_block());
  CHECK(std::get<BoardEvent>(out[2]) == BoardEvent{EventKind::reset_end, 0, 120000, 5000});
  CHECK(d.counters().comments == 1);
  CHECK(d.counters().bad_checksum == 0);
  CHECK(d.counters().discarded_bytes == 0);
}
