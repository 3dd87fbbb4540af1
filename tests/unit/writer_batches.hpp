#pragma once
// Synthetic batches for the writer's disk tests: a raw block of incompressible
// codes, one series point whose total is the batch number, a checkpoint.
#include <cstdint>
#include <random>
#include <vector>

#include "storage_fixture.hpp"

namespace accrue::storage::testing {

constexpr double kWriterT0 = 1.8e9;

inline Batch make_batch(std::int64_t calibration_id, std::uint64_t k, std::uint16_t samples, std::mt19937& rng,
                        bool first) {
  Batch b;
  if (first) b.run_start = run_start(1, 1e-3, kWriterT0);
  RawBlockRow raw;
  raw.run_id = 1;
  raw.first_index = k * samples;
  raw.samples = samples;
  std::vector<std::int32_t> codes;
  for (int i = 0; i < samples; ++i) codes.push_back(std::int32_t(rng() % (1u << 24)) - (1 << 23));
  std::vector<std::uint8_t> scratch;
  raw.set_codes(codes, scratch);
  b.raw.push_back(std::move(raw));
  ChannelRows rows;
  rows.channel = 0;
  rows.run_id = 1;
  rows.calibration_id = calibration_id;
  rows.output.series.push_back(chain::SeriesPoint{k * samples, samples, -1, 1, 0, 0.5, double(k + 1), 0.1});
  chain::TotalSnapshot t;
  t.last_index = k * samples + samples - 1;
  t.total = double(k + 1);
  t.state.last_index = t.last_index;
  rows.checkpoint = t;
  b.channels.push_back(std::move(rows));
  return b;
}

// The writer has committed channel 0 up to last_index.
inline bool committed_to(const WriterCounters& c, std::uint64_t last_index) {
  const auto it = c.committed_last_index.find(0);
  return it != c.committed_last_index.end() && it->second == last_index;
}

inline std::string integrity(const std::string& path) {
  auto db = open_read_only(path);
  Statement st;
  REQUIRE(db->prepare("PRAGMA integrity_check", st).ok());
  bool row = false;
  REQUIRE(st.step(&row).ok());
  return st.column_text(0);
}

}  // namespace accrue::storage::testing
