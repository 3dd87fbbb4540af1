#pragma once
// Framing constants shared by Encoder and Decoder (protocol/PROTOCOL.md §2).
#include <cstddef>
#include <cstdint>

namespace accrue::protocol::frame {

inline constexpr std::uint8_t kSync0 = 0xAC;
inline constexpr std::uint8_t kSync1 = 0xC5;
inline constexpr std::uint8_t kVersion = 1;
inline constexpr std::size_t kHeaderSize = 6;  // sync(2) version(1) type(1) length(2)
inline constexpr std::size_t kCrcSize = 4;
inline constexpr std::size_t kMaxPayload = 4096;
inline constexpr std::size_t kMaxFrame = kHeaderSize + kMaxPayload + kCrcSize;
inline constexpr std::size_t kSampleHeaderSize = 12;  // first_index(8) channels(1) status(1) count(2)
inline constexpr std::size_t kMaxSamplesPerBlock = (kMaxPayload - kSampleHeaderSize) / 3;

}  // namespace accrue::protocol::frame
