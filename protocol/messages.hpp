#pragma once
// The messages of the accrue wire protocol (protocol/PROTOCOL.md), as plain
// values. Board -> host: BoardIdentity, SampleBlock, BoardEvent, CommandAck.
// Host -> board: BoardCommand. Nothing here does I/O.
#include <cstdint>
#include <variant>
#include <vector>

namespace accrue::protocol {

enum class FrameType : std::uint8_t {
  identity = 0x01,
  samples = 0x02,
  event = 0x03,
  ack = 0x04,
  command = 0x10,
};

// Per-block status bits. A board starts a new block whenever any bit changes,
// so every sample of a block shares the block's status.
namespace status_bit {
inline constexpr std::uint8_t reset_active = 0x01;  // switch across C closed
inline constexpr std::uint8_t overload = 0x02;      // an output at or near a rail
inline constexpr std::uint8_t zero_relay = 0x04;    // input shorted for a zero window
}  // namespace status_bit

namespace capability_bit {
inline constexpr std::uint8_t reset_switch = 0x01;
inline constexpr std::uint8_t zero_relay = 0x02;
inline constexpr std::uint8_t bipolar_adc = 0x04;
}  // namespace capability_bit

struct BoardIdentity {
  std::uint32_t board_serial = 0;
  std::uint16_t firmware_version = 0;
  std::uint8_t channel_count = 1;
  std::uint8_t adc_bits = 24;
  double full_scale_v = 10.0;
  double sample_period_s = 1e-3;
  std::uint8_t capabilities = 0;
  // Front-end values the board knows (0 = not known); the config may override.
  double r1_ohm = 0.0;
  double c_farad = 0.0;
  double r2_ohm = 0.0;
  bool operator==(const BoardIdentity&) const = default;
};

struct SampleBlock {
  std::uint64_t first_index = 0;
  std::uint8_t channel_count = 1;
  std::uint8_t status = 0;
  std::uint16_t samples_per_channel = 0;
  // Interleaved by sample: codes[s * channel_count + c]; 24-bit signed range.
  std::vector<std::int32_t> codes;
  bool operator==(const SampleBlock&) const = default;
};

enum class EventKind : std::uint8_t {
  reset_begin = 1,
  reset_end = 2,
  overload = 3,
  board_fault = 4,
  zero_relay_closed = 5,
  zero_relay_opened = 6,
  stream_end = 7,  // the board (or a recording) will send no more samples in this run
};

struct BoardEvent {
  EventKind kind = EventKind::board_fault;
  std::uint8_t channel = 0xFF;  // 0xFF: all channels
  std::uint64_t sample_index = 0;
  std::int32_t value = 0;
  bool operator==(const BoardEvent&) const = default;
};

enum class CommandOp : std::uint8_t {
  ping = 1,
  identify = 2,
  reset_now = 3,
  zero_relay = 4,         // argument 1 closes, 0 opens
  set_sample_period = 5,  // argument in microseconds
};

struct BoardCommand {
  std::uint16_t request_id = 0;
  CommandOp op = CommandOp::ping;
  std::uint32_t argument = 0;
  bool operator==(const BoardCommand&) const = default;
};

enum class AckStatus : std::uint8_t { ok = 0, unknown_command = 1, bad_argument = 2, busy = 3 };

struct CommandAck {
  std::uint16_t request_id = 0;
  AckStatus status = AckStatus::ok;
  bool operator==(const CommandAck&) const = default;
};

using Message = std::variant<BoardIdentity, SampleBlock, BoardEvent, CommandAck, BoardCommand>;

}  // namespace accrue::protocol
