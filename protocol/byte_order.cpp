#include "protocol/byte_order.hpp"

#include <bit>
#include <cstring>

namespace accrue::protocol::wire {

std::uint16_t get_u16(std::span<const std::uint8_t> b, std::size_t at) {
  return std::uint16_t(b[at] | (b[at + 1] << 8));
}
std::uint32_t get_u32(std::span<const std::uint8_t> b, std::size_t at) {
  return std::uint32_t(b[at]) | (std::uint32_t(b[at + 1]) << 8) | (std::uint32_t(b[at + 2]) << 16) |
         (std::uint32_t(b[at + 3]) << 24);
}
std::uint64_t get_u64(std::span<const std::uint8_t> b, std::size_t at) {
  return std::uint64_t(get_u32(b, at)) | (std::uint64_t(get_u32(b, at + 4)) << 32);
}
double get_f64(std::span<const std::uint8_t> b, std::size_t at) { return std::bit_cast<double>(get_u64(b, at)); }

void put_u8(std::vector<std::uint8_t>& out, std::uint8_t v) { out.push_back(v); }
void put_u16(std::vector<std::uint8_t>& out, std::uint16_t v) {
  out.push_back(std::uint8_t(v));
  out.push_back(std::uint8_t(v >> 8));
}
void put_u32(std::vector<std::uint8_t>& out, std::uint32_t v) {
  for (int i = 0; i < 4; ++i) out.push_back(std::uint8_t(v >> (8 * i)));
}
void put_u64(std::vector<std::uint8_t>& out, std::uint64_t v) {
  for (int i = 0; i < 8; ++i) out.push_back(std::uint8_t(v >> (8 * i)));
}
void put_f64(std::vector<std::uint8_t>& out, double v) { put_u64(out, std::bit_cast<std::uint64_t>(v)); }
void put_i24(std::vector<std::uint8_t>& out, std::int32_t v) {
  const auto u = std::uint32_t(v);
  out.push_back(std::uint8_t(u));
  out.push_back(std::uint8_t(u >> 8));
  out.push_back(std::uint8_t(u >> 16));
}

}  // namespace accrue::protocol::wire
