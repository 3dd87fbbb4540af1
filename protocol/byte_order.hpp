#pragma once
// Little-endian field access for the wire format. Readers take a span and an
// offset the caller has already bounds-checked; writers append to a vector.
#include <cstdint>
#include <span>
#include <vector>

namespace accrue::protocol::wire {

std::uint16_t get_u16(std::span<const std::uint8_t> b, std::size_t at);
std::uint32_t get_u32(std::span<const std::uint8_t> b, std::size_t at);
std::uint64_t get_u64(std::span<const std::uint8_t> b, std::size_t at);
double get_f64(std::span<const std::uint8_t> b, std::size_t at);
// Sign-extends a 24-bit two's-complement value.
inline std::int32_t get_i24(const std::uint8_t* p) {
  const std::uint32_t u = std::uint32_t(p[0]) | (std::uint32_t(p[1]) << 8) | (std::uint32_t(p[2]) << 16);
  return std::int32_t(u << 8) >> 8;
}

void put_u8(std::vector<std::uint8_t>& out, std::uint8_t v);
void put_u16(std::vector<std::uint8_t>& out, std::uint16_t v);
void put_u32(std::vector<std::uint8_t>& out, std::uint32_t v);
void put_u64(std::vector<std::uint8_t>& out, std::uint64_t v);
void put_f64(std::vector<std::uint8_t>& out, double v);
void put_i24(std::vector<std::uint8_t>& out, std::int32_t v);

}  // namespace accrue::protocol::wire
