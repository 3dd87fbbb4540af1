#include "protocol/encoder.hpp"

#include <span>

#include "protocol/byte_order.hpp"
#include "protocol/crc32.hpp"
#include "protocol/frame.hpp"

namespace accrue::protocol {
namespace {

using namespace wire;

struct PayloadWriter {
  std::vector<std::uint8_t>& out;
  bool operator()(const BoardIdentity& m) const {
    put_u32(out, m.board_serial);
    put_u16(out, m.firmware_version);
    put_u8(out, m.channel_count);
    put_u8(out, m.adc_bits);
    put_f64(out, m.full_scale_v);
    put_f64(out, m.sample_period_s);
    put_u8(out, m.capabilities);
    put_f64(out, m.r1_ohm);
    put_f64(out, m.c_farad);
    put_f64(out, m.r2_ohm);
    return true;
  }
  bool operator()(const SampleBlock& m) const {
    const std::size_t values = std::size_t(m.channel_count) * m.samples_per_channel;
    if (m.channel_count == 0 || values != m.codes.size() || values > frame::kMaxSamplesPerBlock) return false;
    put_u64(out, m.first_index);
    put_u8(out, m.channel_count);
    put_u8(out, m.status);
    put_u16(out, m.samples_per_channel);
    for (std::int32_t c : m.codes) put_i24(out, c);
    return true;
  }
  bool operator()(const BoardEvent& m) const {
    put_u8(out, std::uint8_t(m.kind));
    put_u8(out, m.channel);
    put_u64(out, m.sample_index);
    put_u32(out, std::uint32_t(m.value));
    return true;
  }
  bool operator()(const CommandAck& m) const {
    put_u16(out, m.request_id);
    put_u8(out, std::uint8_t(m.status));
    return true;
  }
  bool operator()(const BoardCommand& m) const {
    put_u16(out, m.request_id);
    put_u8(out, std::uint8_t(m.op));
    put_u32(out, m.argument);
    return true;
  }
};

FrameType type_of(const Message& m) {
  static constexpr FrameType types[] = {FrameType::identity, FrameType::samples, FrameType::event, FrameType::ack,
                                        FrameType::command};
  return types[m.index()];
}

}  // namespace

std::vector<std::uint8_t> encode_payload(const Message& message) {
  std::vector<std::uint8_t> out;
  if (!std::visit(PayloadWriter{out}, message)) return {};
  return out;
}

bool encode_into(const Message& message, std::vector<std::uint8_t>& out) {
  const std::size_t start = out.size();
  out.push_back(frame::kSync0);
  out.push_back(frame::kSync1);
  out.push_back(frame::kVersion);
  out.push_back(std::uint8_t(type_of(message)));
  out.push_back(0);
  out.push_back(0);
  if (!std::visit(PayloadWriter{out}, message)) {
    out.resize(start);
    return false;
  }
  const std::size_t payload = out.size() - start - frame::kHeaderSize;
  if (payload > frame::kMaxPayload) {
    out.resize(start);
    return false;
  }
  out[start + 4] = std::uint8_t(payload);
  out[start + 5] = std::uint8_t(payload >> 8);
  const auto crc = crc32_iso_hdlc(std::span(out).subspan(start + 2, 4 + payload));
  put_u32(out, crc);
  return true;
}

std::vector<std::uint8_t> encode(const Message& message) {
  std::vector<std::uint8_t> out;
  encode_into(message, out);
  return out;
}

}  // namespace accrue::protocol
