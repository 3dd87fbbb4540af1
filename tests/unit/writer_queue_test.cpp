// The writer's queue: raw blocks arrive encoded (RawBlockRow::set_codes), so
// what it holds and counts are the stored bytes; what is read back equals the
// codes put in.
#include <catch2/catch.hpp>

#include <cstdint>
#include <limits>
#include <random>
#include <vector>

#include "storage/block_codec.hpp"
#include "storage/reader.hpp"
#include "writer_batches.hpp"

using namespace accrue;
using namespace accrue::storage;
using namespace accrue::storage::testing;

namespace {

struct InputBlock {
  std::uint64_t first_index;
  std::uint8_t channel_count;
  std::uint8_t status;
  std::uint16_t samples;
  std::vector<std::int32_t> codes;
};

}  // namespace

TEST_CASE("writer: raw blocks queued encoded read back as the codes put in", "[storage][writer]") {
  TempDir dir("queue");
  const std::string path = dir.file("q.db");
  std::unique_ptr<Writer> w;
  WriterSettings settings;
  settings.commit_interval = std::chrono::milliseconds(1);
  REQUIRE(Writer::open(path, settings, [] { return kWriterT0; }, w,
                       [] { return std::optional<std::uint64_t>(1ull << 40); })
              .ok());
  w->start();

  // Blocks of 1 to 4 channels: a slow drift (small deltas), uniform 24-bit noise, the
  // 24-bit extremes, the 32-bit extremes (differences that need 64 bits), and an empty block.
  std::mt19937 rng(91);
  std::vector<InputBlock> input;
  std::uint64_t index = 0;
  const auto add = [&](std::uint8_t channels, std::vector<std::int32_t> codes, std::uint8_t status = 0) {
    REQUIRE(codes.size() % channels == 0);
    const auto samples = std::uint16_t(codes.size() / channels);
    input.push_back({index, channels, status, samples, std::move(codes)});
    index += samples;
  };
  for (std::uint8_t ch = 1; ch <= 4; ++ch) {
    std::vector<std::int32_t> drift, noise;
    for (int i = 0; i < 250 * ch; ++i) drift.push_back(std::int32_t(1000 * (i % ch) + i / ch + int(rng() % 3)));
    for (int i = 0; i < 250 * ch; ++i) noise.push_back(std::int32_t(rng() % (1u << 24)) - (1 << 23));
    add(ch, drift, std::uint8_t(ch));
    add(ch, noise);
  }
  constexpr std::int32_t lo = std::numeric_limits<std::int32_t>::min(), hi = std::numeric_limits<std::int32_t>::max();
  add(2, {-(1 << 23), (1 << 23) - 1, (1 << 23) - 1, -(1 << 23), 0, 0});
  add(1, {lo, hi, lo, hi, 0, -1, 1});
  add(3, {});

  std::vector<std::uint8_t> scratch;
  std::uint64_t codes_in = 0, bytes_in = 0;
  for (std::size_t k = 0; k < input.size(); ++k) {
    const InputBlock& in = input[k];
    Batch b;
    if (k == 0) b.run_start = run_start(1, 1e-3, kWriterT0);
    RawBlockRow raw;
    raw.run_id = 1;
    raw.first_index = in.first_index;
    raw.channel_count = in.channel_count;
    raw.status = in.status;
    raw.samples = in.samples;
    raw.set_codes(in.codes, scratch);
    // What is queued is exactly the codec's output: nothing is left for the writer to encode.
    std::vector<std::uint8_t> expected;
    block_codec::encode(in.codes, in.channel_count, expected);
    REQUIRE(raw.data == expected);
    CHECK(raw.data.capacity() == raw.data.size());  // allocated to size, so the queue's count is what it holds
    CHECK(raw.code_count() == in.codes.size());
    codes_in += in.codes.size();
    bytes_in += raw.data.size();
    b.raw.push_back(std::move(raw));
    CHECK(b.raw_bytes() == b.raw[0].data.size() + sizeof(RawBlockRow));
    w->submit(std::move(b));
  }
  w->stop();
  const WriterCounters c = w->counters();
  CHECK(c.raw_blocks_written == input.size());
  CHECK(c.raw_blocks_shed == 0);
  CHECK(c.raw_samples_written == codes_in);
  CHECK(c.raw_bytes_written == bytes_in);
  CHECK(c.queued_bytes == 0);
  CHECK(scalar(path, "SELECT sum(length(data)) FROM raw_block") == double(bytes_in));

  std::unique_ptr<Reader> reader;
  REQUIRE(Reader::open(path, reader).ok());
  std::vector<RawBlock> back;
  const Status s = reader->raw_blocks(1, 0, index, back);
  INFO(s.message);
  REQUIRE(s.ok());
  REQUIRE(back.size() == input.size());
  for (std::size_t k = 0; k < input.size(); ++k) {
    INFO("block " << k << " at index " << input[k].first_index);
    CHECK(back[k].first_index == input[k].first_index);
    CHECK(back[k].channel_count == input[k].channel_count);
    CHECK(back[k].samples == input[k].samples);
    CHECK(back[k].status == input[k].status);
    CHECK(back[k].encoding == block_codec::kDeltaZigzagVarint);
    CHECK(back[k].codes == input[k].codes);
  }
}

namespace {

// Batch k of one run: a 250-sample raw block whose codes (and so encoded size) are the
// same in every batch, one series point and a checkpoint, so each batch queues the same bytes.
Batch fixed_batch(std::int64_t calibration_id, std::uint64_t k) {
  std::mt19937 unused(0);
  Batch b = make_batch(calibration_id, k, 250, unused, k == 0);
  std::vector<std::int32_t> codes;
  for (int i = 0; i < 250; ++i) codes.push_back(100000 + 37 * i);
  std::vector<std::uint8_t> scratch;
  b.raw[0].set_codes(codes, scratch);
  return b;
}

}  // namespace

TEST_CASE("writer: raw blocks are shed only when they would take the queue above the soft limit, series points only above the hard limit",
          "[storage][writer]") {
  // Deterministic: the writer's thread is not started while batches are submitted, so
  // nothing leaves the queue and queued_bytes is exactly the sum of what was accepted.
  TempDir dir("shed");
  const std::string path = dir.file("s.db");
  const Batch probe = fixed_batch(1, 1);
  const std::size_t raw = probe.raw_bytes(), derived = probe.derived_bytes(), per = raw + derived;
  REQUIRE(fixed_batch(1, 0).raw_bytes() == raw);
  // The soft limit sits at ten batches plus `slack`: an 11th batch keeps its raw block only if the
  // whole batch fits, slack >= per.
  const bool slack_fits = GENERATE(false, true);
  const std::size_t slack = slack_fits ? per : per - 1;
  INFO("raw " << raw << " B, derived " << derived << " B per batch; slack " << slack);
  WriterSettings settings;
  settings.commit_interval = std::chrono::milliseconds(1);
  settings.soft_limit_bytes = 10 * per + slack;
  // After the raw blocks stop fitting, each batch queues only its derived rows: five more fit exactly.
  const std::size_t accepted_raw = slack_fits ? 11 : 10;
  const std::size_t hard = accepted_raw * per + (15 - accepted_raw) * derived;
  settings.hard_limit_bytes = hard;
  std::unique_ptr<Writer> w;
  REQUIRE(Writer::open(path, settings, [] { return kWriterT0; }, w,
                       [] { return std::optional<std::uint64_t>(1ull << 40); })
              .ok());
  chain::Calibration cal;
  REQUIRE(w->ensure_calibration(0, cal).ok());

  std::uint64_t k = 0;
  for (; k < 10; ++k) {
    w->submit(fixed_batch(cal.id, k));
    const auto c = w->counters();
    INFO("batch " << k);
    CHECK(c.queued_bytes == (k + 1) * per);  // at most the soft limit minus slack: never shed below it
    CHECK(c.raw_blocks_shed == 0);
  }
  w->submit(fixed_batch(cal.id, k++));  // the 11th: 11 * per against 10 * per + slack
  auto c = w->counters();
  CHECK(c.raw_blocks_shed == (slack_fits ? 0u : 1u));
  CHECK(c.queued_bytes == (slack_fits ? 11 * per : 10 * per + derived));
  CHECK(c.queued_bytes <= settings.soft_limit_bytes);
  if (slack_fits) {
    // Now exactly at the soft limit: the next batch would go above it.
    CHECK(c.queued_bytes == settings.soft_limit_bytes);
    w->submit(fixed_batch(cal.id, k++));
    CHECK(w->counters().raw_blocks_shed == 1);
  }
  // Derived rows only, up to exactly the hard limit: no series point is shed on the way.
  while (w->counters().queued_bytes + derived <= hard) {
    w->submit(fixed_batch(cal.id, k++));
    CHECK(w->counters().series_points_shed == 0);
  }
  c = w->counters();
  CHECK(c.queued_bytes == hard);
  CHECK(k == 15);
  CHECK(c.raw_blocks_shed == 15 - accepted_raw);
  // Above the hard limit: this batch's series point is shed, its raw block too, its checkpoint is kept.
  w->submit(fixed_batch(cal.id, k++));
  c = w->counters();
  CHECK(c.series_points_shed == 1);
  CHECK(c.raw_blocks_shed == 16 - accepted_raw);
  CHECK(c.queued_bytes > hard);  // the checkpoint is never shed
  CHECK(c.queued_bytes_peak == c.queued_bytes);

  w->start();
  REQUIRE(w->wait_until([&](const WriterCounters& x) { return committed_to(x, k * 250 - 1); }));
  CHECK(w->counters().queued_bytes == 0);
  // Below half the soft limit again: the next batch carries the "writer_shed" event and is not shed.
  w->submit(fixed_batch(cal.id, k++));
  w->stop();
  c = w->counters();
  CHECK(c.raw_blocks_shed == 16 - accepted_raw);
  CHECK(c.raw_blocks_written == accepted_raw + 1);
  CHECK(c.raw_blocks_written + c.raw_blocks_shed == k);
  CHECK(c.series_points_written == 16);
  CHECK(c.queued_bytes == 0);
  CHECK(scalar(path, "SELECT count(*) FROM raw_block") == double(accepted_raw + 1));
  CHECK(scalar(path, "SELECT count(*) FROM series_point") == 16);
  CHECK(scalar(path, "SELECT total FROM total_checkpoint WHERE channel = 0") == double(k));  // no checkpoint lost
  CHECK(scalar(path, "SELECT count(*) FROM event WHERE kind = 'writer_shed' AND detail = 'raw_blocks_shed=" +
                         std::to_string(16 - accepted_raw) + " series_points_shed=1'") == 1);
}
