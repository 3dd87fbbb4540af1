// libFuzzer target: the framed Decoder on arbitrary bytes, fed in two pieces,
// then the end of the stream (finish()). Checks its promises: bounded buffer,
// every byte accounted for (also after finish, with nothing left buffered),
// and every decoded message re-encodes to a frame that decodes to itself.
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
  const std::size_t before_end = out.size();
  d.finish(out);
  if (d.buffered() != 0 || c.bytes_in != c.accepted_bytes + c.discarded_bytes) std::abort();
  // A stream that ends can only add frames that were whole in the buffer.
  if (out.size() < before_end) std::abort();
  for (const auto& m : out) {
    Decoder again;
    std::vector<Message> back;
    again.feed(encode(m), back);
    if (back.size() != 1 || !(back[0] == m)) std::abort();
  }
  return 0;
}
