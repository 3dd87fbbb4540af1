#pragma once
// Encoder turns a Message into one complete frame (sync, header, payload,
// CRC-32/ISO-HDLC). It is stateless and does no I/O. encode() returns an empty
// vector only for a SampleBlock that cannot fit a frame or whose codes do not
// match its declared shape; callers split blocks at frame::kMaxSamplesPerBlock.
#include <cstdint>
#include <vector>

#include "protocol/messages.hpp"

namespace accrue::protocol {

std::vector<std::uint8_t> encode_payload(const Message& message);
std::vector<std::uint8_t> encode(const Message& message);
// Appends the frame to `out` (no reallocation churn on the simulator's hot path).
bool encode_into(const Message& message, std::vector<std::uint8_t>& out);

}  // namespace accrue::protocol
