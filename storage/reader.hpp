#pragma once
// Reader answers queries from its own read-only connection, so it never takes
// the writer's lock beyond what WAL requires. One Reader per thread.
#include <cstdint>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include "daemon/chain/records.hpp"
#include "storage/database.hpp"

namespace accrue::storage {

struct RunInfo {
  std::int64_t run_id = 0;
  std::int64_t board_serial = 0;
  double sample_period_s = 0.0;
  double utc_at_index0 = 0.0;
  std::string started_utc;
  std::string ended_utc;  // empty while running
  std::string end_reason;
};

struct CheckpointRow {
  int channel = 0;
  std::int64_t run_id = 0;
  std::uint64_t last_index = 0;
  double total = 0.0;
  double std_uncertainty = 0.0;
  std::uint32_t segments = 0;
  std::uint32_t flags = 0;
  std::int64_t calibration_id = 0;
  std::string quantity;
  std::string unit;
  double quantity_per_volt = 0.0;
  std::string committed_utc;
  chain::ChainState state;
};

struct WindowPoint {
  std::uint64_t first_index = 0;
  std::uint64_t samples = 0;
  double utc = 0.0;  // Unix seconds of the first sample
  double min_v = 0.0, max_v = 0.0, mean_v = 0.0, last_v = 0.0;
  double total = 0.0, total_u = 0.0;
};

struct WindowQuery {
  int channel = 0;
  std::optional<std::int64_t> run_id;  // default: the newest run
  std::uint64_t from_index = 0;
  std::uint64_t to_index = UINT64_MAX;  // inclusive
  std::size_t max_points = 1000;
};

struct WindowResult {
  RunInfo run;
  std::string quantity, unit;
  std::vector<WindowPoint> points;
  std::uint64_t rows_read = 0;
};

class Reader {
 public:
  static Status open(const std::string& path, std::unique_ptr<Reader>& out);
  Status runs(std::vector<RunInfo>& out);
  Status latest_run(std::optional<RunInfo>& out);
  Status checkpoints(std::vector<CheckpointRow>& out);
  Status window(const WindowQuery& q, WindowResult& out);

 private:
  explicit Reader(std::unique_ptr<Database> db) : db_(std::move(db)) {}
  Status run_by_id(std::int64_t run_id, std::optional<RunInfo>& out);
  std::unique_ptr<Database> db_;
};

}  // namespace accrue::storage
