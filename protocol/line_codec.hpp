#pragma once
// The text-line variant of the board protocol (protocol/PROTOCOL.md §5), for
// simple microcontroller boards that print lines instead of framing binary.
//
// LineDecoder takes bytes in any chunking and yields the same Messages as the
// framed Decoder. It never holds more than kMaxLineBytes of unconsumed input;
// a longer line is discarded up to its end and counted as oversize. Comments
// and blank lines are counted and skipped; a line that does not parse, or
// whose optional checksum does not match, is dropped whole and counted.
// Consecutive sample lines of one feed() call with the same channel count and
// status and contiguous indices are merged into one SampleBlock (at most
// frame::kMaxSamplesPerBlock codes), so downstream sees blocks, not lines.
// Invariant: bytes_in == accepted_bytes + discarded_bytes + buffered().
// No I/O, not thread-safe; one per link.
//
// encode_line() writes a Message as lines (a SampleBlock as one line per
// sample), with the optional checksum when asked.
#include <cstddef>
#include <cstdint>
#include <optional>
#include <span>
#include <string>
#include <string_view>
#include <vector>

#include "protocol/messages.hpp"

namespace accrue::protocol {

inline constexpr std::size_t kMaxLineBytes = 4096;

struct LineDecoderCounters {
  std::uint64_t bytes_in = 0;
  std::uint64_t lines_ok = 0;         // lines that became a message
  std::uint64_t comments = 0;         // comment and blank lines
  std::uint64_t bad_lines = 0;        // did not parse as any line kind
  std::uint64_t bad_checksum = 0;
  std::uint64_t oversize_lines = 0;   // longer than kMaxLineBytes
  std::uint64_t accepted_bytes = 0;   // bytes of good lines and comments, terminators included
  std::uint64_t discarded_bytes = 0;  // bytes of bad, oversize and cut-off lines
};

// Parses one line (no terminator, no checksum). nullopt: not a valid line.
std::optional<Message> parse_line(std::string_view line);

class LineDecoder {
 public:
  void feed(std::span<const std::uint8_t> bytes, std::vector<Message>& out);
  // The stream ended or the link was reopened: a partial line is discarded and counted.
  void reset();
  const LineDecoderCounters& counters() const { return counters_; }
  std::size_t buffered() const { return line_.size(); }

 private:
  void finish_line(std::vector<Message>& out, std::size_t out_start);
  std::string line_;
  bool skipping_ = false;  // inside an oversize line, until its end
  LineDecoderCounters counters_;
};

std::string encode_line(const Message& message, bool with_checksum = false);

}  // namespace accrue::protocol
