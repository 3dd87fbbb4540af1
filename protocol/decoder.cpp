#include "protocol/decoder.hpp"

#include <algorithm>

#include "protocol/byte_order.hpp"
#include "protocol/crc32.hpp"
#include "protocol/frame.hpp"

namespace accrue::protocol {

using namespace wire;

std::optional<Message> parse_payload(std::uint8_t type, std::span<const std::uint8_t> p) {
  switch (FrameType(type)) {
    case FrameType::identity: {
      if (p.size() != 49) return std::nullopt;
      BoardIdentity m;
      m.board_serial = get_u32(p, 0);
      m.firmware_version = get_u16(p, 4);
      m.channel_count = p[6];
      m.adc_bits = p[7];
      m.full_scale_v = get_f64(p, 8);
      m.sample_period_s = get_f64(p, 16);
      m.capabilities = p[24];
      m.r1_ohm = get_f64(p, 25);
      m.c_farad = get_f64(p, 33);
      m.r2_ohm = get_f64(p, 41);
      if (m.channel_count == 0 || m.adc_bits < 2 || m.adc_bits > 24) return std::nullopt;
      if (!(m.sample_period_s > 0.0) || !(m.full_scale_v > 0.0)) return std::nullopt;
      return m;
    }
    case FrameType::samples: {
      if (p.size() < frame::kSampleHeaderSize) return std::nullopt;
      SampleBlock m;
      m.first_index = get_u64(p, 0);
      m.channel_count = p[8];
      m.status = p[9];
      m.samples_per_channel = get_u16(p, 10);
      const std::size_t values = std::size_t(m.channel_count) * m.samples_per_channel;
      if (m.channel_count == 0 || p.size() != frame::kSampleHeaderSize + 3 * values) return std::nullopt;
      m.codes.resize(values);
      const std::uint8_t* src = p.data() + frame::kSampleHeaderSize;
      for (std::size_t i = 0; i < values; ++i, src += 3) m.codes[i] = get_i24(src);
      return m;
    }
    case FrameType::event: {
      if (p.size() != 14) return std::nullopt;
      BoardEvent m;
      if (p[0] < 1 || p[0] > 7) return std::nullopt;
      m.kind = EventKind(p[0]);
      m.channel = p[1];
      m.sample_index = get_u64(p, 2);
      m.value = std::int32_t(get_u32(p, 10));
      return m;
    }
    case FrameType::ack: {
      if (p.size() != 3 || p[2] > 3) return std::nullopt;
      return CommandAck{get_u16(p, 0), AckStatus(p[2])};
    }
    case FrameType::command: {
      if (p.size() != 7 || p[2] < 1 || p[2] > 5) return std::nullopt;
      return BoardCommand{get_u16(p, 0), CommandOp(p[2]), get_u32(p, 3)};
    }
  }
  return std::nullopt;
}

void Decoder::drop(std::size_t n) {
  pos_ += n;
  counters_.discarded_bytes += n;
}

void Decoder::feed(std::span<const std::uint8_t> bytes, std::vector<Message>& out) {
  counters_.bytes_in += bytes.size();
  buffer_.insert(buffer_.end(), bytes.begin(), bytes.end());
  scan(out, false);
}

void Decoder::finish(std::vector<Message>& out) {
  scan(out, true);
  reset();
}

void Decoder::scan(std::vector<Message>& out, bool at_end) {
  for (;;) {
    const std::size_t avail = buffer_.size() - pos_;
    const std::uint8_t* base = buffer_.data() + pos_;
    // Find the next sync pair; everything before it is garbage.
    std::size_t skip = 0;
    while (skip < avail && !(base[skip] == frame::kSync0 && (skip + 1 == avail || base[skip + 1] == frame::kSync1))) {
      ++skip;
    }
    if (skip) {
      drop(skip);
      continue;
    }
    if (avail == 0) break;
    if (avail < frame::kHeaderSize) {
      if (!at_end) break;
      ++counters_.truncated;
      drop(1);
      continue;
    }
    if (base[2] != frame::kVersion) {
      ++counters_.bad_version;
      drop(1);
      continue;
    }
    const std::size_t length = std::size_t(base[4]) | (std::size_t(base[5]) << 8);
    if (length > frame::kMaxPayload) {
      ++counters_.oversize;
      drop(1);
      continue;
    }
    const std::size_t total = frame::kHeaderSize + length + frame::kCrcSize;
    if (avail < total) {
      if (!at_end) break;
      // The stream ended inside this frame (or its length was corrupted):
      // it will never complete, but frames behind its header may be whole.
      ++counters_.truncated;
      drop(1);
      continue;
    }
    const std::span<const std::uint8_t> frame_bytes(base, total);
    const std::uint32_t crc = get_u32(frame_bytes, frame::kHeaderSize + length);
    if (crc32_iso_hdlc(frame_bytes.subspan(2, 4 + length)) != crc) {
      ++counters_.bad_crc;
      drop(1);  // the length may be what was corrupted: rescan from the next byte
      continue;
    }
    auto message = parse_payload(base[3], frame_bytes.subspan(frame::kHeaderSize, length));
    if (!message) {
      ++counters_.malformed;
      drop(total);
      continue;
    }
    pos_ += total;
    ++counters_.frames_ok;
    counters_.accepted_bytes += total;
    out.push_back(std::move(*message));
  }
  // Keep the unconsumed tail only (at most one frame's worth).
  if (pos_ > 0) {
    buffer_.erase(buffer_.begin(), buffer_.begin() + std::ptrdiff_t(pos_));
    pos_ = 0;
  }
}

void Decoder::reset() {
  counters_.discarded_bytes += buffer_.size() - pos_;
  buffer_.clear();
  pos_ = 0;
}

}  // namespace accrue::protocol
