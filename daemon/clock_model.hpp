#pragma once
// ClockModel maps the board's sample index to UTC. It takes (index, host
// receive time) pairs, where the index is the last sample of a block just
// received, and fits utc(index) = t0 + offset_s + index * period_s * (1 + skew).
//
// Why a lower envelope: a receive time is the true time of the sample plus a
// latency that is never negative (USB polling, scheduler, buffering) and
// sometimes large. Only the smallest latencies carry the timebase, so the
// model keeps, per bucket of board time, the pair with the least residual and
// fits a least-squares line to those minima; spikes only ever raise a bucket's
// values and so never enter the fit. Buckets double in width when full, so
// memory is bounded (kMaxBuckets) for runs of any length.
//
// The reported skew is the board clock's rate error relative to the host's,
// in ppm (positive: a board sample period is longer than nominal in host
// time). Single-threaded; no clock of its own: times come from the caller.
#include <cstddef>
#include <cstdint>
#include <vector>

namespace accrue::daemon {

struct ClockFit {
  bool valid = false;          // needs at least two buckets
  double offset_s = 0.0;       // utc(0) - t0
  double skew_ppm = 0.0;
  std::size_t buckets = 0;
  std::uint64_t pairs = 0;
};

class ClockModel {
 public:
  static constexpr std::size_t kMaxBuckets = 256;
  // `bucket_s`: board time per bucket at the start (it doubles as the run grows).
  ClockModel(double sample_period_s, double bucket_s = 1.0);

  void add(std::uint64_t index, double receive_unix);
  void clear();
  ClockFit fit() const;
  // UTC (Unix seconds) of a sample index under the current fit; receive-time based before it is valid.
  double utc_of(std::uint64_t index) const;

 private:
  struct Bucket {
    std::uint64_t index = 0;
    double residual_s = 0.0;  // receive - t0 - index * period
  };
  void compact();

  double period_s_;
  std::uint64_t bucket_samples_;
  bool have_origin_ = false;
  double t0_ = 0.0;  // first receive time: keeps residuals small for the fit's precision
  std::vector<Bucket> buckets_;  // in increasing bucket order; empty buckets are absent
  std::vector<std::uint64_t> bucket_ids_;
  std::uint64_t pairs_ = 0;
};

}  // namespace accrue::daemon
