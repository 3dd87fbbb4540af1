// libFuzzer target: the framed Decoder on arbitrary bytes, fed in two pieces.
// Checks its promises: bounded buffer, every byte accounted for, and every
// decoded message re-encodes to a frame that decodes to itself.
#include <cstdlib>

#include "protocol/decoder.hpp"
#include "protocol/encoder.hpp"
#include "protocol/frame.hpp"

using namespace accrue::protocol;

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  Decoder d;
  std::vector<Message> out;
  const std::size_t cut = size ? data[0] % (size + 1) : 0;
  d.feed(std::span(data, cut), out);
  d.feed(std::span(data + cut, size - cut), out);
  const auto& c = d.counters();
  if (d.buffered() > frame::kMaxFrame) std::abort();
  if (c.bytes_in != c.accepted_bytes + c.discarded_bytes + d.buffered()) std::abort();
  for (const auto& m : out) {
    Decoder again;
    std::vector<Message> back;
    again.feed(encode(m), back);
    if (back.size() != 1 || !(back[0] == m)) std::abort();
  }
  return 0;
}
