// libFuzzer target: the text-line LineDecoder on arbitrary bytes, fed in two
// pieces. Checks: bounded buffer, every byte accounted for, and every decoded
// message re-encodes (with checksum) to lines that decode to it again.
#include <cstdlib>

#include "protocol/line_codec.hpp"

using namespace accrue::protocol;

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  LineDecoder d;
  std::vector<Message> out;
  const std::size_t cut = size ? data[0] % (size + 1) : 0;
  d.feed(std::span(data, cut), out);
  d.feed(std::span(data + cut, size - cut), out);
  const auto& c = d.counters();
  if (d.buffered() > kMaxLineBytes) std::abort();
  if (c.bytes_in != c.accepted_bytes + c.discarded_bytes + d.buffered()) std::abort();
  for (const auto& m : out) {
    const std::string text = encode_line(m, true);
    LineDecoder again;
    std::vector<Message> back;
    again.feed(std::span(reinterpret_cast<const std::uint8_t*>(text.data()), text.size()), back);
    if (back.size() != 1 || !(back[0] == m)) std::abort();
  }
  return 0;
}
