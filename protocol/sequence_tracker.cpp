#include "protocol/sequence_tracker.hpp"

namespace accrue::protocol {

SequenceResult SequenceTracker::on_block(std::uint64_t first_index, std::uint64_t samples_per_channel) {
  ++counters_.blocks;
  SequenceResult r;
  if (!started_) {
    r.outcome = SequenceOutcome::first;
  } else if (first_index < next_index_) {
    r.outcome = SequenceOutcome::reboot;
    ++counters_.reboots;
  } else if (first_index > next_index_) {
    r.outcome = SequenceOutcome::gap;
    r.missing_samples = first_index - next_index_;
    ++counters_.gaps;
    counters_.missing_samples += r.missing_samples;
  } else {
    r.outcome = SequenceOutcome::continuous;
  }
  started_ = true;
  next_index_ = first_index + samples_per_channel;
  return r;
}

}  // namespace accrue::protocol
