#pragma once
// The codec for raw_block.data. Takes a block's ADC codes interleaved by
// sample (s0c0 s0c1 ... s1c0 ...) and its channel count; guarantees that
// decode(encode(x)) == x for every int32 input, and that decode() of any byte
// string either returns exactly channel_count * samples codes or a Status
// saying what is wrong (truncated, over-long varint, out of range, trailing
// bytes) without reading past the input.
//
// Encoding 2 (the writer's): per channel, d = code - previous code of the same
// channel (the first from 0), computed in 64 bits; zigzag-mapped to unsigned
// (z = (d << 1) ^ (d >> 63), the mapping Protocol Buffers documents for its
// sint types) and written as an unsigned LEB128 varint (7 bits per byte, low
// group first, high bit = more follows; DWARF standard, section 7.6).
// A slowly drifting integrator output gives small differences, so most codes
// take one or two bytes instead of three.
// Encoding 1 (schema version 1 files): packed little-endian 24-bit two's
// complement, decoded only.
#include <cstdint>
#include <span>
#include <vector>

#include "storage/status.hpp"

namespace accrue::storage::block_codec {

inline constexpr int kPacked24 = 1;
inline constexpr int kDeltaZigzagVarint = 2;

// Appends the encoding-2 bytes of `codes` to `out`. channel_count >= 1.
void encode(std::span<const std::int32_t> codes, int channel_count, std::vector<std::uint8_t>& out);

// Decodes a block of `encoding` into `out` (replaced). `count` is
// channel_count * samples per channel.
Status decode(int encoding, std::span<const std::uint8_t> data, int channel_count, std::size_t count,
              std::vector<std::int32_t>& out);

}  // namespace accrue::storage::block_codec
