#pragma once
// What Ingest tells the reset schedule about each accepted sample block: board
// time, the UTC the clock model gives for it, the block's status bits and, per
// channel, how close the output came to full scale. Plain data.
#include <cstdint>
#include <vector>

namespace accrue::daemon {

struct BlockObservation {
  std::int64_t run_id = 0;
  std::uint64_t last_index = 0;   // the block's last sample
  double board_time_s = 0.0;      // last_index * sample period (the board's timebase)
  double utc = 0.0;               // UTC of last_index (clock model; receive time until it fits)
  std::uint8_t status = 0;        // protocol status bits of the block
  std::uint8_t capabilities = 0;  // the board identity's capability bits
  // Per channel: the block's largest |output| as a fraction of the output full
  // scale, and that full scale in output volts.
  std::vector<double> level_fraction;
  std::vector<double> full_scale_v;
};

}  // namespace accrue::daemon
