#include "storage/block_codec.hpp"

#include <sqlite3.h>

#include <string>

namespace accrue::storage::block_codec {
namespace {

void put_varint(std::uint64_t v, std::vector<std::uint8_t>& out) {
  while (v >= 0x80) {
    out.push_back(std::uint8_t(v | 0x80));
    v >>= 7;
  }
  out.push_back(std::uint8_t(v));
}

std::uint64_t zigzag(std::int64_t d) { return (std::uint64_t(d) << 1) ^ std::uint64_t(d >> 63); }
std::int64_t unzigzag(std::uint64_t z) { return std::int64_t(z >> 1) ^ -std::int64_t(z & 1); }

Status corrupt(std::string what, std::size_t at) {
  return Status::error(SQLITE_CORRUPT, "raw block: " + what + " at byte " + std::to_string(at));
}

Status decode_varint(std::span<const std::uint8_t> data, int channel_count, std::size_t count,
                     std::vector<std::int32_t>& out) {
  std::size_t at = 0;
  for (std::size_t i = 0; i < count; ++i) {
    std::uint64_t z = 0;
    for (int shift = 0;; shift += 7) {
      if (at >= data.size()) return corrupt("truncated after " + std::to_string(i) + " codes", at);
      const std::uint8_t byte = data[at++];
      // 64 bits take at most ten groups, and the tenth may carry one bit only.
      if (shift == 63 && byte > 1) return corrupt("varint longer than 64 bits", at - 1);
      z |= std::uint64_t(byte & 0x7F) << shift;
      if (!(byte & 0x80)) break;
      if (shift == 63) return corrupt("varint longer than 64 bits", at - 1);
    }
    const std::int64_t prev = i >= std::size_t(channel_count) ? out[i - std::size_t(channel_count)] : 0;
    // Wrapping add in unsigned: a hostile delta must not be signed overflow.
    const std::int64_t value = std::int64_t(std::uint64_t(prev) + std::uint64_t(unzigzag(z)));
    if (value < INT32_MIN || value > INT32_MAX) return corrupt("code out of 32-bit range", at);
    out.push_back(std::int32_t(value));
  }
  if (at != data.size()) return corrupt(std::to_string(data.size() - at) + " trailing bytes", at);
  return Status::success();
}

Status decode_packed24(std::span<const std::uint8_t> data, std::size_t count, std::vector<std::int32_t>& out) {
  if (data.size() != count * 3)
    return corrupt("packed 24-bit block holds " + std::to_string(data.size()) + " bytes, expected " +
                       std::to_string(count * 3),
                   0);
  for (std::size_t i = 0; i < count; ++i) {
    std::uint32_t v = std::uint32_t(data[3 * i]) | (std::uint32_t(data[3 * i + 1]) << 8) |
                      (std::uint32_t(data[3 * i + 2]) << 16);
    if (v & 0x800000u) v |= 0xFF000000u;
    out.push_back(std::int32_t(v));
  }
  return Status::success();
}

}  // namespace

void encode(std::span<const std::int32_t> codes, int channel_count, std::vector<std::uint8_t>& out) {
  const std::size_t stride = std::size_t(channel_count < 1 ? 1 : channel_count);
  for (std::size_t i = 0; i < codes.size(); ++i) {
    const std::int64_t prev = i >= stride ? codes[i - stride] : 0;
    put_varint(zigzag(std::int64_t(codes[i]) - prev), out);
  }
}

Status decode(int encoding, std::span<const std::uint8_t> data, int channel_count, std::size_t count,
              std::vector<std::int32_t>& out) {
  out.clear();
  if (channel_count < 1) return Status::error(SQLITE_CORRUPT, "raw block: channel count " + std::to_string(channel_count));
  if (encoding == kDeltaZigzagVarint && count > data.size())  // every code takes a byte at least
    return corrupt("claims " + std::to_string(count) + " codes in " + std::to_string(data.size()) + " bytes", 0);
  out.reserve(count);
  if (encoding == kDeltaZigzagVarint) return decode_varint(data, channel_count, count, out);
  if (encoding == kPacked24) return decode_packed24(data, count, out);
  return Status::error(SQLITE_CORRUPT, "raw block: unknown encoding " + std::to_string(encoding));
}

}  // namespace accrue::storage::block_codec
