#pragma once
// Reader answers queries from its own read-only connection, so it never takes
// the writer's lock beyond what WAL requires; every query is one short read
// transaction, so a Reader never pins the WAL. One Reader per thread.
//
// window() returns at most max_points points over an index range from the
// coarsest rollup tier that still has max_points buckets there (series points
// when none has), merging neighbours down to max_points: it reads fewer than
// 10 * (max_points + 1) rows whatever the span (see storage/rollup.hpp).
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
  std::optional<int> derivation;       // default: the run's newest usable derivation
  std::uint64_t from_index = 0;
  std::uint64_t to_index = UINT64_MAX;  // inclusive
  std::size_t max_points = 1000;
};

struct WindowResult {
  RunInfo run;
  int derivation = 1;  // the derivation read
  std::string quantity, unit;
  std::vector<WindowPoint> points;
  std::int64_t tier_width_s = 0;  // rollup width read; 0: series points
  std::uint64_t rows_read = 0;    // rows stepped over, all statements of the query
  std::uint64_t vm_steps = 0;     // sqlite3_stmt_status(SQLITE_STMTSTATUS_VM_STEP), summed
  std::uint64_t fullscan_steps = 0;  // SQLITE_STMTSTATUS_FULLSCAN_STEP, summed (0: every read used an index)
};

// One stored raw block, decoded.
struct RawBlock {
  std::int64_t run_id = 0;
  std::uint64_t first_index = 0;
  int channel_count = 1;
  std::uint32_t samples = 0;  // per channel
  std::uint32_t status = 0;
  int encoding = 0;
  std::vector<std::int32_t> codes;  // interleaved by sample
};

// One derivation of a run (schema.sql, table derivation) and its channels.
struct DerivationChannelInfo {
  int channel = 0;
  std::int64_t calibration_id = 0;
  std::string baseline;     // "linear none", "quadratic huber", "unknown"
  std::string settings;     // JSON chain settings; empty when not recorded
  std::string start_state;  // JSON chain state; empty: the run started from zero
  std::optional<std::uint64_t> last_index;
  std::optional<double> total, std_uncertainty;
  std::uint32_t segments = 0, flags = 0;
  std::string quantity, unit;
  double quantity_per_volt = 0.0;
};

struct DerivationInfo {
  std::int64_t run_id = 0;
  int derivation = 0;
  std::optional<int> parent;
  std::string created_utc, who, reason, changes, state, finished_utc;
  std::vector<DerivationChannelInfo> channels;
};

class Reader {
 public:
  static Status open(const std::string& path, std::unique_ptr<Reader>& out);
  Status runs(std::vector<RunInfo>& out);
  Status latest_run(std::optional<RunInfo>& out);
  Status checkpoints(std::vector<CheckpointRow>& out);
  Status window(const WindowQuery& q, WindowResult& out);
  // Raw blocks of a run whose first_index lies in [from_index, to_index], decoded.
  Status raw_blocks(std::int64_t run_id, std::uint64_t from_index, std::uint64_t to_index, std::vector<RawBlock>& out);

  // Every derivation of a run, oldest first, with its channels (reader_derivations.cpp).
  Status derivations(std::int64_t run_id, std::vector<DerivationInfo>& out);
  // `wanted` if the run has it in a readable state (recorded or complete),
  // else the newest readable one when `wanted` is empty; SQLITE_NOTFOUND otherwise.
  Status resolve_derivation(std::int64_t run_id, std::optional<int> wanted, int& out);

 private:
  explicit Reader(std::unique_ptr<Database> db) : db_(std::move(db)) {}
  Status run_by_id(std::int64_t run_id, std::optional<RunInfo>& out);
  std::unique_ptr<Database> db_;
};

}  // namespace accrue::storage
