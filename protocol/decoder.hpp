#pragma once
// Decoder turns a byte stream from a board into Messages. It takes bytes in
// any chunking, never holds more than one maximum frame of unconsumed input,
// resynchronises on the next sync pair after garbage, and counts every byte it
// throws away and why. It does no I/O and is not thread-safe; one per link.
#include <cstdint>
#include <optional>
#include <span>
#include <vector>

#include "protocol/messages.hpp"

namespace accrue::protocol {

struct DecoderCounters {
  std::uint64_t bytes_in = 0;
  std::uint64_t frames_ok = 0;
  std::uint64_t accepted_bytes = 0;   // bytes of frames that decoded; bytes_in = accepted + discarded + buffered
  std::uint64_t discarded_bytes = 0;  // bytes that were not part of a valid frame
  std::uint64_t bad_crc = 0;
  std::uint64_t oversize = 0;         // header declared a payload over kMaxPayload
  std::uint64_t bad_version = 0;
  std::uint64_t malformed = 0;        // CRC good, payload not a valid message
  std::uint64_t truncated = 0;        // a frame the stream ended inside (finish())
};

// Parses one payload of the given frame type; nullopt when it is not valid.
std::optional<Message> parse_payload(std::uint8_t type, std::span<const std::uint8_t> payload);

class Decoder {
 public:
  // Appends every complete message found in `bytes` (after what was buffered) to `out`.
  void feed(std::span<const std::uint8_t> bytes, std::vector<Message>& out);
  // The stream ended (end of file, link lost): a frame that can no longer
  // complete is counted as truncated and rescanned from its next byte, so
  // whole frames behind a corrupted length still come out; the rest is
  // discarded and counted. The decoder is then empty.
  void finish(std::vector<Message>& out);
  // Buffered partial input is discarded and counted (no rescan).
  void reset();
  const DecoderCounters& counters() const { return counters_; }
  std::size_t buffered() const { return buffer_.size() - pos_; }

 private:
  void drop(std::size_t n);
  void scan(std::vector<Message>& out, bool at_end);
  std::vector<std::uint8_t> buffer_;
  std::size_t pos_ = 0;
  DecoderCounters counters_;
};

}  // namespace accrue::protocol
