#pragma once
// Fault injection between the simulated board and its wire. FaultSettings is
// the "faults" part of a scenario (every fault off by default). FaultInjector
// takes the board's messages one at a time, already encoded, and appends to
// the wire what a faulty link would carry: some frames dropped, some bytes
// altered, bursts of garbage between frames, every frame lost while the cable
// is out, one frame cut short where the board stalls. It counts what it did
// and what a correct decoder and sequence tracker must therefore report
// (FaultCounts), so tests compare counters with exact numbers.
//
// The board's own faults (a reboot, a clock that runs fast or slow) live in
// BoardModel; the cable pull and the stall's pause are the pty owner's part
// (accrue-sim's main), which tells the injector when the cable is out.
//
// Deterministic for a given seed: its own generator, apart from the board's.
// A stream_end event is never touched: it is how a test learns the run is over.
#include <cstdint>
#include <random>
#include <span>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "protocol/messages.hpp"

namespace accrue::sim {

struct FaultSettings {
  double corrupt_byte_rate = 0.0;      // probability per byte that it is altered (XOR with 1..255)
  double drop_frame_rate = 0.0;        // probability per message that it is never sent
  double garbage_burst_rate = 0.0;     // probability per message that a garbage burst follows it
  int garbage_burst_max_bytes = 64;    // a burst is 1..this many bytes, never the first sync byte
  std::vector<double> cable_pull_at_s; // board times of cable pulls
  double cable_pull_s = 0.5;           // board time the cable stays out (its frames are lost)
  double cable_pull_pause_s = 0.3;     // wall time between closing the terminal and the new one
  double reboot_at_s = -1.0;           // board time of a board reboot (< 0: none)
  double reboot_s = 0.2;               // board time the rebooting board sends nothing
  double reboot_zero_window_s = 1.0;   // zero window the board runs after the reboot
  double clock_skew_ppm = 0.0;         // board period longer than nominal by this (negative: shorter)
  double stall_at_s = -1.0;            // board time the board stops sending in the middle of a frame
  double stall_pause_s = 0.3;          // wall time it stays silent before it carries on
  std::uint64_t seed = 7;

  bool any() const;
};

// What the injector did, and what the receiving side must count because of it.
struct FaultCounts {
  std::uint64_t messages = 0;            // messages the board produced
  std::uint64_t frames_sent = 0;         // sent intact
  std::uint64_t frames_dropped = 0;
  std::uint64_t frames_corrupted = 0;    // sent with at least one byte altered
  std::uint64_t bytes_corrupted = 0;
  std::uint64_t frames_lost_to_pulls = 0;
  std::uint64_t frames_truncated = 0;    // the stall's cut frame
  std::uint64_t garbage_bursts = 0;
  std::uint64_t garbage_bytes = 0;
  // Framed wire only: the decoder outcome of each corrupted frame, from the
  // first altered byte (sync: not seen as a frame; version: bad version;
  // length: oversize when it reads over the limit, else bad CRC; else bad CRC).
  std::uint64_t expect_bad_crc = 0;
  std::uint64_t expect_bad_version = 0;
  std::uint64_t expect_oversize = 0;
  std::uint64_t expect_unseen = 0;
  // Sync pairs (AC C5) the decoder meets while it hunts through corrupted or
  // cut frames: sample data holds them by chance (about one per 33 kB), and
  // each is one more header the decoder rejects (bad version, oversize or bad
  // CRC, by the bytes that follow it).
  std::uint64_t expect_false_syncs = 0;
  std::uint64_t expect_discarded_bytes = 0;  // garbage + corrupted and cut frames, whole
  // Sample accounting (per channel). Lost blocks followed by a delivered block
  // of the same board session show as one gap each; the others cannot be seen
  // as a gap (lost at a session's start or end).
  std::uint64_t sample_blocks_lost = 0;
  std::uint64_t samples_lost = 0;
  std::uint64_t expect_gaps = 0;
  std::uint64_t expect_missing_samples = 0;
  std::uint64_t samples_lost_at_session_edges = 0;
  std::uint64_t cable_pulls = 0;
  std::uint64_t stalls = 0;
  std::uint64_t reboots = 0;

  nlohmann::json to_json() const;
};

class FaultInjector {
 public:
  FaultInjector(FaultSettings settings, bool framed);

  // One encoded message: appends what the wire carries to `wire`.
  void pass(const protocol::Message& m, std::span<const std::uint8_t> bytes, std::vector<std::uint8_t>& wire);
  // While the cable is out every message is lost.
  void set_cable_out(bool out);
  // The next sample block is cut halfway; stall_offset() then says where in
  // the wire buffer the board went silent (the owner pauses there).
  void stall_next_block() { stall_pending_ = true; }
  bool take_stall(std::size_t& offset);
  // The board rebooted: lost samples not yet seen as a gap can no longer be.
  void new_session();

  // Lost samples that no later block of their session revealed count as lost at a session's edge.
  FaultCounts counts() const;
  const FaultSettings& settings() const { return settings_; }

 private:
  void lose(const protocol::Message& m);
  void corrupt_into(std::span<const std::uint8_t> bytes, std::vector<std::uint8_t>& wire);
  void garbage(std::vector<std::uint8_t>& wire);
  std::uint64_t draw_skip();
  // wire[from, to) is bytes the decoder hunts through: counts the sync pairs there.
  void hunted(const std::vector<std::uint8_t>& wire, std::size_t from, std::size_t to);

  FaultSettings settings_;
  bool framed_;
  std::mt19937_64 rng_;
  std::uint64_t bytes_to_next_corruption_ = 0;
  bool cable_out_ = false;
  bool stall_pending_ = false;
  bool stall_ready_ = false;
  std::size_t stall_offset_ = 0;
  bool session_has_block_ = false;        // a block of this session was delivered
  std::uint64_t pending_lost_samples_ = 0;
  bool pending_sync0_ = false;  // the last hunted byte was the first sync byte
  FaultCounts counts_;
};

nlohmann::json to_json(const FaultSettings& f);
std::string apply_json(const nlohmann::json& j, FaultSettings& f);

}  // namespace accrue::sim
