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
