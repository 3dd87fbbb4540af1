#pragma once
// SequenceTracker follows the sample index of one board session and sorts
// each incoming block (PROTOCOL.md §3.2): the first of a session, continuous,
// a gap (an index jump: frames were lost; the missing count is exact), or a
// reboot (the index went back: the board restarted and a new session begins
// with this block). A changed identity is a new session too: the owner calls
// restart(). Pure bookkeeping: no I/O, no clock.
#include <cstdint>

namespace accrue::protocol {

enum class SequenceOutcome { first, continuous, gap, reboot };

struct SequenceResult {
  SequenceOutcome outcome = SequenceOutcome::first;
  std::uint64_t missing_samples = 0;  // gap only: samples per channel never received
};

struct SequenceCounters {
  std::uint64_t blocks = 0;
  std::uint64_t gaps = 0;
  std::uint64_t missing_samples = 0;
  std::uint64_t reboots = 0;
};

class SequenceTracker {
 public:
  SequenceResult on_block(std::uint64_t first_index, std::uint64_t samples_per_channel);
  // The session ended (identity change, stream end): the next block is a first.
  void restart() { started_ = false; }
  bool started() const { return started_; }
  std::uint64_t next_index() const { return next_index_; }
  const SequenceCounters& counters() const { return counters_; }

 private:
  bool started_ = false;
  std::uint64_t next_index_ = 0;
  SequenceCounters counters_;
};

}  // namespace accrue::protocol
