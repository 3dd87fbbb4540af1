#pragma once
// CRC-32/ISO-HDLC as listed in Greg Cook's "Catalogue of parametrised CRC
// algorithms" (reveng): width 32, poly 0x04C11DB7, init 0xFFFFFFFF,
// refin/refout true, xorout 0xFFFFFFFF, check("123456789") = 0xCBF43926.
// The computation is Boost.CRC's crc_32_type; this header only fixes the name
// and the interface the frame codec uses.
#include <cstddef>
#include <cstdint>
#include <span>

namespace accrue::protocol {

inline constexpr std::uint32_t kCrc32CheckValue = 0xCBF43926u;

std::uint32_t crc32_iso_hdlc(std::span<const std::uint8_t> bytes);

}  // namespace accrue::protocol
