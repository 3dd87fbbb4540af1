// accrue-writer-driver: a process that drives storage::Writer with the
// deterministic stream of tests/helpers/crash_workload.hpp, for the crash test
// to SIGKILL at random moments. It resumes from the file's checkpoint the way
// accrued does (position and total taken from the stored row), prints
// "ready <next batch> <total>" once the writer is open, then submits batches
// until killed or, with --batches N, until N batches are committed and the
// writer is stopped cleanly. It paces itself on the writer's queue so nothing
// is ever shed (a shed raw block would show as a missing row).
//
//   accrue-writer-driver DB [--batches N] [--commit-ms M]
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <optional>
#include <string>
#include <thread>

#include "crash_workload.hpp"
#include "storage/writer.hpp"

using namespace accrue;
namespace crash = accrue::testing::crash;

int main(int argc, char** argv) {
  if (argc < 2) {
    std::fprintf(stderr, "usage: %s DB [--batches N] [--commit-ms M]\n", argv[0]);
    return 2;
  }
  const std::string path = argv[1];
  std::optional<std::uint64_t> limit;
  int commit_ms = 2;
  for (int i = 2; i + 1 < argc; i += 2) {
    if (std::strcmp(argv[i], "--batches") == 0) limit = std::strtoull(argv[i + 1], nullptr, 10);
    else if (std::strcmp(argv[i], "--commit-ms") == 0) commit_ms = std::atoi(argv[i + 1]);
    else {
      std::fprintf(stderr, "unknown option %s\n", argv[i]);
      return 2;
    }
  }
  storage::WriterSettings settings;
  settings.commit_interval = std::chrono::milliseconds(commit_ms);
  settings.wal_checkpoint_frames = 200;  // checkpoints happen often, so kills land in them too
  std::unique_ptr<storage::Writer> writer;
  // Free space is injected: the disk floor is not what this test is about.
  if (storage::Status s = storage::Writer::open(
          path, settings, [] { return crash::kUtc0; }, writer, [] { return std::optional<std::uint64_t>(1ull << 40); });
      !s.ok()) {
    std::fprintf(stderr, "open: %s\n", s.message.c_str());
    return 1;
  }
  chain::Calibration cal;
  if (storage::Status s = writer->ensure_calibration(0, cal); !s.ok()) {
    std::fprintf(stderr, "calibration: %s\n", s.message.c_str());
    return 1;
  }
  // Resume from what is stored.
  std::uint64_t k = 0;
  double total = 0.0;
  {
    std::unique_ptr<storage::Database> db;
    if (storage::Status s = storage::Database::open(path, storage::Database::Mode::read_only, db); !s.ok()) {
      std::fprintf(stderr, "%s\n", s.message.c_str());
      return 1;
    }
    storage::Statement st;
    bool row = false;
    storage::Status s = db->prepare("SELECT last_index, total FROM total_checkpoint WHERE channel = 0", st);
    if (s.ok()) s = st.step(&row);
    if (!s.ok()) {
      std::fprintf(stderr, "checkpoint: %s\n", s.message.c_str());
      return 1;
    }
    if (row) {
      k = (std::uint64_t(st.column_int(0)) + 1) / crash::kSamples;
      total = st.column_double(1);
    }
  }
  std::printf("ready %llu %.17g\n", static_cast<unsigned long long>(k), total);
  std::fflush(stdout);
  writer->start();
  for (;; ++k) {
    if (limit && k >= *limit) break;
    writer->submit(crash::make_batch(k, total, cal.id));
    total += crash::increment(k);
    while (writer->counters().queued_bytes > (256u << 10)) std::this_thread::sleep_for(std::chrono::milliseconds(1));
  }
  writer->stop();
  const auto c = writer->counters();
  if (c.raw_blocks_shed || c.series_points_shed || c.queued_bytes) {
    std::fprintf(stderr, "writer shed or left rows: shed %llu, queued %zu, last error %s\n",
                 static_cast<unsigned long long>(c.raw_blocks_shed), c.queued_bytes, c.last_error.c_str());
    return 1;
  }
  return 0;
}
