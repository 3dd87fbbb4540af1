#include "protocol/crc32.hpp"

#include <boost/crc.hpp>

namespace accrue::protocol {

std::uint32_t crc32_iso_hdlc(std::span<const std::uint8_t> bytes) {
  boost::crc_32_type crc;
  crc.process_bytes(bytes.data(), bytes.size());
  return crc.checksum();
}

}  // namespace accrue::protocol
