#pragma once
// What the ingest hands the Writer in one go: rows for one stretch of input,
// in data-flow order. A Batch is a value; the Writer owns it once submitted.
#include <cstdint>
#include <optional>
#include <span>
#include <string>
#include <vector>

#include "daemon/chain/channel_chain.hpp"
#include "daemon/chain/records.hpp"
#include "protocol/messages.hpp"

namespace accrue::storage {

// What one channel's chain starts a run with: stored as derivation 1's
// derivation_channel row so the run can be recomputed exactly later.
struct RunChannelStart {
  int channel = 0;
  std::int64_t calibration_id = 0;
  chain::ChainSettings settings;
  std::optional<chain::ChainState> start_state;  // a total carried from the run before
};

struct RunStart {
  std::int64_t run_id = 0;
  protocol::BoardIdentity board;
  double utc_at_index0 = 0.0;  // Unix seconds of sample index 0
  double started_unix = 0.0;
};

struct RunEnd {
  std::int64_t run_id = 0;
  std::string reason;
  double ended_unix = 0.0;
};

// One raw block as it is stored: the producer encodes the codes (set_codes)
// before submitting, so the writer's queue holds the bytes raw_block.data
// gets (about 1.5 B per 24-bit sample) rather than 4-byte codes, and the
// writer thread only writes them.
struct RawBlockRow {
  std::int64_t run_id = 0;
  std::uint64_t first_index = 0;
  std::uint8_t channel_count = 1;
  std::uint8_t status = 0;
  std::uint16_t samples = 0;  // per channel
  // block_codec encoding 2 of the ADC codes interleaved by sample, exactly as stored.
  std::vector<std::uint8_t> data;

  std::size_t code_count() const { return std::size_t(channel_count) * samples; }
  // Sets data to the encoding of `codes` (channel_count * samples of them,
  // interleaved by sample), allocated to its exact size. `scratch` is the
  // caller's buffer, reused across blocks so encoding allocates once per block.
  void set_codes(std::span<const std::int32_t> codes, std::vector<std::uint8_t>& scratch);
};

struct ChannelRows {
  int channel = 0;
  std::int64_t run_id = 0;
  std::int64_t calibration_id = 0;
  chain::ChainOutput output;
  std::optional<chain::TotalSnapshot> checkpoint;
};

struct EventRow {
  std::optional<std::int64_t> run_id;
  std::optional<int> channel;
  std::optional<std::uint64_t> sample_index;
  std::string kind;
  std::string detail;
  double host_unix = 0.0;
};

struct Batch {
  std::optional<RunStart> run_start;
  std::vector<RunChannelStart> run_channels;  // with run_start; empty: derivation 1 is recorded without settings
  std::vector<RawBlockRow> raw;
  std::vector<ChannelRows> channels;
  std::vector<EventRow> events;
  std::optional<RunEnd> run_end;

  bool empty() const { return !run_start && raw.empty() && channels.empty() && events.empty() && !run_end; }
  // What the raw blocks hold in memory (encoded bytes allocated plus each row): what the queue limits count.
  std::size_t raw_bytes() const;
  std::size_t derived_bytes() const;
};

}  // namespace accrue::storage
