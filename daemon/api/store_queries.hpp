#pragma once
// StoreQueries answers the API's read queries that go beyond storage::Reader
// (bucketed window pages, segments, events, calibration versions) on its own
// read-only SQLite connection. One instance per thread; every SQLite return
// code comes back as a storage::Status. It does not know JSON-RPC.
#include <cstdint>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include "storage/database.hpp"
#include "storage/reader.hpp"

namespace accrue::daemon::api {

// One bucket of the derived series: the series points whose first sample
// index falls in [first_index, first_index + bucket_samples).
struct Bucket {
  std::uint64_t first_index = 0;
  std::uint64_t samples = 0;
  double min_v = 0, max_v = 0, mean_v = 0, last_v = 0;
  double total = 0, total_u = 0;  // running total at the bucket's last point
  double delta = 0;               // increase of the total over the bucket
};

struct WindowPage {
  std::string quantity, unit;
  std::uint64_t lo = 0, hi = 0;        // sample-index extent of the data in the window
  std::uint64_t bucket_samples = 1;
  std::vector<Bucket> buckets;
  std::optional<std::uint64_t> next_start;  // where the next page starts, if any
  bool empty = true;
  // Buckets finer than the series points, made from the raw blocks: the volts
  // are exact, the totals interpolated between the series points' totals.
  bool from_raw = false;
};

struct SegmentRow {
  std::int64_t ordinal = 0;
  std::uint64_t first_index = 0, last_index = 0;
  double start_v = 0, end_v = 0, drift_v = 0, gap_before_v = 0, gap_before_u_v = 0, end_points_u_v = 0;
  double quantity = 0, total_after = 0, total_u_after = 0;
  std::int64_t baseline_ordinal = 0, flags = 0, calibration_id = 0;
};

struct EventFilter {
  std::optional<std::int64_t> run_id;
  std::optional<int> channel;
  std::vector<std::string> kinds;  // empty: every kind
  std::optional<std::string> from_utc, to_utc;          // host time, RFC 3339 text (inclusive)
  std::optional<std::uint64_t> from_index, to_index;  // sample index (inclusive)
  std::int64_t after_id = 0;
  std::size_t limit = 1000;
};

struct EventOut {
  std::int64_t event_id = 0;
  std::optional<std::int64_t> run_id;
  std::optional<int> channel;
  std::optional<std::uint64_t> sample_index;
  std::string kind, detail, host_utc;
};

struct CalibrationRow {
  std::int64_t calibration_id = 0;
  int channel = 0;
  std::string created_utc, quantity, unit, definition;
  double quantity_per_volt = 0;
};

class StoreQueries {
 public:
  static storage::Status open(const std::string& path, std::unique_ptr<StoreQueries>& out);

  // Buckets of `bucket_samples` (0: chosen so that the whole window makes
  // about max_points buckets) starting at `start` (or the window's first
  // point), at most `page_points` of them. The first page fixes lo, hi and
  // bucket_samples; a continuation passes them back unchanged. Where
  // max_points asks for buckets finer than the series points and the raw
  // blocks are still kept, the buckets come from the raw samples (from_raw;
  // lo and hi are then the samples' extent in the window).
  // `derivation` (here and in segments()): the run's derivation to read;
  // nullopt reads the newest usable one (storage::Reader::resolve_derivation).
  storage::Status window_page(std::int64_t run_id, int channel, std::uint64_t from_index, std::uint64_t to_index,
                              std::size_t max_points, std::size_t page_points, std::uint64_t bucket_samples,
                              std::optional<std::uint64_t> start, WindowPage& out,
                              std::optional<int> derivation = std::nullopt);
  storage::Status segments(std::int64_t run_id, int channel, std::uint64_t from_index, std::uint64_t to_index,
                           std::int64_t after_ordinal, std::size_t limit, std::vector<SegmentRow>& out,
                           std::optional<int> derivation = std::nullopt);
  storage::Status events(const EventFilter& f, std::vector<EventOut>& out);
  // channel nullopt: every channel. Ordered by channel, then version.
  storage::Status calibrations(std::optional<int> channel, std::vector<CalibrationRow>& out);

 private:
  explicit StoreQueries(std::unique_ptr<storage::Database> db) : db_(std::move(db)) {}
  // The samples' extent in [from, to] by raw-block index seeks; nullopt when no raw block holds any.
  storage::Status raw_extent(std::int64_t run_id, std::uint64_t from_index, std::uint64_t to_index,
                             std::optional<std::pair<std::uint64_t, std::uint64_t>>& out);
  // The page [first_bucket, last_bucket] of out.bucket_samples from the raw blocks (store_queries_raw.cpp).
  storage::Status raw_page(std::int64_t run_id, int channel, std::uint64_t stride, std::uint64_t first_bucket,
                           std::uint64_t last_bucket, WindowPage& out, std::optional<int> derivation);
  std::unique_ptr<storage::Database> db_;
};

}  // namespace accrue::daemon::api
