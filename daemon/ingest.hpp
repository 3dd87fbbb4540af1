#pragma once
// Ingest is the daemon's one-way pipeline from link bytes to storage: it owns
// the protocol Decoder and one ChannelChain per channel, tracks board runs
// (identity, sample-index continuity, reboots), and hands the Writer a Batch
// on every flush(). It never waits on the disk. Single-threaded: the Asio
// thread calls it.
#include <cstdint>
#include <functional>
#include <map>
#include <memory>
#include <optional>
#include <span>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "daemon/block_observation.hpp"
#include "daemon/chain/channel_chain.hpp"
#include "daemon/clock_model.hpp"
#include "daemon/log.hpp"
#include "daemon/options.hpp"
#include "protocol/decoder.hpp"
#include "protocol/line_codec.hpp"
#include "protocol/sequence_tracker.hpp"
#include "storage/batch.hpp"
#include "storage/reader.hpp"
#include "storage/writer.hpp"

namespace accrue::daemon {

struct IngestCounters {
  std::uint64_t blocks = 0;
  std::uint64_t samples = 0;          // per-channel samples accepted
  std::uint64_t samples_before_identity = 0;
  std::uint64_t gaps = 0;
  std::uint64_t missing_samples = 0;  // summed over gaps
  std::uint64_t runs_started = 0;
  std::uint64_t runs_resumed = 0;
  std::uint64_t board_events = 0;
  std::uint64_t wrong_shape_blocks = 0;  // channel count differs from the identity
};

class Ingest {
 public:
  using Clock = std::function<double()>;  // Unix seconds, injected
  Ingest(const DaemonConfig& config, storage::Writer& writer, Logger& log, Clock clock);

  // What the store says was running when the daemon last stopped.
  void set_resume_point(std::optional<storage::RunInfo> run, std::vector<storage::CheckpointRow> checkpoints);

  void on_bytes(std::span<const std::uint8_t> bytes, double receive_unix);
  void on_link_lost(const std::string& why);
  // Hands everything gathered since the last call, with checkpoints, to the writer.
  void flush();
  // The run cannot continue (daemon stopping keeps it open; this closes it).
  void end_run(const std::string& reason);
  // Config reload (SIGHUP): takes the new channels, reset schedule and zero
  // windows. Changed calibrations close the current run and the next block
  // opens a new one with new calibration versions; the total carries on.
  void reconfigure(const DaemonConfig& config);
  const DaemonConfig& config() const { return config_; }

  // Board acknowledgements go here (the daemon's BoardCommands); they are not data.
  void set_ack_handler(std::function<void(const protocol::CommandAck&, double receive_unix)> h) {
    on_ack_ = std::move(h);
  }

  // Records an event that did not come from the board (e.g. an API control request).
  void record_event(std::string kind, std::string detail, std::optional<std::uint64_t> index = std::nullopt,
                    std::optional<int> channel = std::nullopt) {
    event(std::move(kind), std::move(detail), index, channel);
  }
  // A quiet interval marked while the run goes on (API quiet_mark): each
  // chain (or `channel`'s) fits the part it has not yet processed as a
  // baseline. Returns the first index the fits will use; nullopt when no run
  // is active or the interval is already behind every chain.
  std::optional<std::uint64_t> mark_quiet(std::optional<int> channel, std::uint64_t from_index, std::uint64_t to_index);
  // Called after every accepted sample block with what the reset schedule needs (ResetDriver).
  void set_block_observer(std::function<void(const BlockObservation&)> observer) { block_observer_ = std::move(observer); }
  // Called with every event as it is recorded, before it reaches the writer (live subscribers).
  void set_event_listener(std::function<void(const storage::EventRow&)> listener) { event_listener_ = std::move(listener); }

  nlohmann::json status() const;
  const protocol::Decoder& decoder() const { return decoder_; }
  const IngestCounters& counters() const { return counters_; }
  bool run_active() const { return run_.has_value(); }

 private:
  struct Run {
    std::int64_t run_id = 0;
    protocol::BoardIdentity board;
    std::uint64_t next_index = 0;
    bool any_samples = false;
    std::vector<std::unique_ptr<chain::ChannelChain>> chains;
    std::vector<storage::ChannelRows> rows;  // per channel, current batch
  };

  void handle(const protocol::Message& m, double receive_unix);
  void on_identity(const protocol::BoardIdentity& id, double receive_unix);
  void on_block(const protocol::SampleBlock& b, double receive_unix);
  void on_event(const protocol::BoardEvent& e, double receive_unix);
  void store_chain_events(Run& run, std::size_t channel);
  // Config zero_windows (UTC spans the user marks quiet) become quiet windows
  // of the live chains once the block about to be processed reaches their start.
  void apply_zero_windows(std::uint64_t block_last_index);
  void observe_block(const protocol::SampleBlock& b);
  void start_run(const protocol::BoardIdentity& id, double receive_unix, std::optional<std::uint64_t> first_index);
  chain::Calibration calibration_for(int channel, const protocol::BoardIdentity& id) const;
  void event(std::string kind, std::string detail, std::optional<std::uint64_t> index = std::nullopt,
             std::optional<int> channel = std::nullopt);

  DaemonConfig config_;
  storage::Writer& writer_;
  Logger& log_;
  Clock clock_;
  protocol::Decoder decoder_;
  protocol::LineDecoder line_decoder_;  // used instead of decoder_ when wire_format is "lines"
  bool lines_ = false;
  protocol::SequenceTracker sequence_;
  std::optional<ClockModel> clock_model_;  // per run: sample index -> UTC
  std::function<void(const protocol::CommandAck&, double)> on_ack_;
  std::vector<protocol::Message> messages_;
  std::optional<protocol::BoardIdentity> identity_;
  std::optional<Run> run_;
  std::int64_t next_run_id_ = 1;
  std::optional<storage::RunInfo> resume_run_;
  std::vector<storage::CheckpointRow> resume_checkpoints_;
  std::map<int, chain::ChainState> carried_;  // totals carried across board runs
  storage::Batch batch_;
  IngestCounters counters_;
  // Blocks that arrive before the board's identity (a daemon started while the
  // board streams) wait here, bounded, until the identity says how to read them.
  struct WaitingBlock {
    protocol::SampleBlock block;
    double receive_unix;
  };
  std::vector<WaitingBlock> waiting_;
  static constexpr std::size_t kMaxWaitingSamples = 1u << 20;
  std::size_t waiting_samples_ = 0;
  std::function<void(const storage::EventRow&)> event_listener_;
  std::function<void(const BlockObservation&)> block_observer_;
  BlockObservation observation_;  // reused for every block, so observing allocates nothing once sized
  std::vector<std::uint8_t> encode_scratch_;  // block_codec output per raw block, reused (see RawBlockRow::set_codes)
  std::vector<bool> zero_windows_done_;  // per config zero window, this run; cleared by start_run and reconfigure
};

}  // namespace accrue::daemon
