#pragma once
// reprocess() recomputes one stored run from its raw blocks through the same
// measurement chain the daemon runs (daemon/chain), with a corrected
// calibration and/or another baseline choice, and stores the result as a new
// derivation of the run beside the others: it never changes a row of another
// derivation, and the provenance (who, when, why, what changed) is kept in the
// derivation row (schema.sql).
//
// What it takes: the database path, the request, an injected clock and a
// progress callback. What it guarantees:
//  - with no change, the new derivation's segments, baselines and series
//    points equal the parent's exactly, and its totals bit for bit (the chain
//    is deterministic; the parent's settings and starting state are stored in
//    derivation_channel), provided every raw block is still stored;
//    rollup sums (sum_v) may differ in the last bits, since a sum's rounding
//    depends on how the points were grouped into commits;
//  - it writes in short transactions (blocks_per_transaction blocks each), so
//    a daemon writing the same file waits at most one of them; while it works
//    the derivation is "running" and no query reads it by default; at the end
//    it is "complete" and becomes the run's default; on an error or a
//    cancel it is "failed", its rows are deleted, and the status says why;
//  - holes between stored raw blocks are counted in the result and handled as
//    the daemon handles a sample-index gap (ChannelChain::on_missing_samples);
//    where the daemon saw samples whose raw blocks were not stored (shed under
//    overload or a full disk), the derivation differs from the live one there;
//  - a daemon restart within the run (a "run_resumed" event) is replayed as the
//    daemon did it: the chains start again from the state at that point.
//
// Offline use (accrue reprocess --database) is for a file no daemon is
// writing: new calibration versions get the next free id, which a running
// daemon's Writer would not know of. A daemon passes `calibration_ids`, which
// hands the versions to its Writer instead.
#include <cstdint>
#include <functional>
#include <optional>
#include <string>
#include <vector>

#include "daemon/chain/channel_chain.hpp"
#include "storage/status.hpp"

namespace accrue::storage {

// What changes for one channel (or every channel) against the parent derivation.
struct ChannelChange {
  std::optional<int> channel;  // nullopt: every channel
  // Calibration: each value given replaces the parent's (a new calibration version).
  std::optional<double> c_farad, r1_ohm, r2_ohm, gain;
  std::optional<std::int32_t> zero_code;
  // Baseline choice.
  std::optional<chain::BaselineModel> baseline_model;
  std::optional<chain::BaselineRobust> baseline_robust;
  // Intervals (sample indices, inclusive) the user knows were quiet: fitted as baselines.
  std::vector<chain::ChainSettings::QuietWindow> add_quiet_windows;
  // Baselines of the parent (by ordinal) not to use, e.g. a zero window spoiled
  // by a glitch: its samples become plain dead time, the baseline before it stays in force.
  std::vector<std::uint32_t> drop_baselines;
};

struct ReprocessRequest {
  std::int64_t run_id = 0;
  std::optional<int> parent;  // default: the run's newest readable derivation
  std::string who;
  std::string reason;
  std::vector<ChannelChange> changes;
  std::size_t blocks_per_transaction = 256;
};

struct ReprocessProgress {
  std::int64_t run_id = 0;
  int derivation = 0;
  std::uint64_t blocks_done = 0, blocks_total = 0;
  std::uint64_t samples_done = 0, samples_total = 0;  // per channel
};

struct ReprocessChannelResult {
  int channel = 0;
  std::int64_t calibration_id = 0;
  std::string quantity, unit, baseline;
  double total = 0.0, std_uncertainty = 0.0;
  std::uint32_t segments = 0, flags = 0;
  std::uint64_t last_index = 0;
  std::optional<double> parent_total;  // the parent derivation's total, when it is stored
};

struct ReprocessResult {
  std::int64_t run_id = 0;
  int derivation = 0;
  int parent = 0;
  std::uint64_t blocks = 0, samples = 0;       // raw blocks read, samples per channel
  std::uint64_t index_gaps = 0, gap_samples = 0;  // holes between stored blocks
  std::uint64_t resumes = 0;                   // daemon restarts within the run, replayed
  bool run_open = false;                       // the run had not ended: covers up to last_index
  std::string changes;                         // JSON, as stored in derivation.changes
  std::vector<ReprocessChannelResult> channels;
};

// Returns false to cancel.
using ReprocessProgressFn = std::function<bool(const ReprocessProgress&)>;
// Gives `calibration` an id (a stored or new version) for `channel`; the row
// must be in the file when the function returns.
using CalibrationIds = std::function<Status(int channel, chain::Calibration& calibration)>;

Status reprocess(const std::string& path, const ReprocessRequest& request, const std::function<double()>& clock,
                 const ReprocessProgressFn& progress, ReprocessResult& out, const CalibrationIds& calibration_ids = {});

}  // namespace accrue::storage
