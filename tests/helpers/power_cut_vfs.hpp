#pragma once
// PowerCutVfs: an SQLite VFS for tests that wraps the default one and models a
// disk with a volatile write cache. Every write and truncate of a database,
// WAL or journal file goes to an in-memory image of the file (what SQLite
// reads back) and to a list of operations not yet durable; xSync applies the
// list to the real file in order and fsyncs it. A power cut, at a chosen
// write (cut_at_write) or on demand, keeps none of the unsynced operations
// (Loss::all_unsynced, the model the issue asks for) or a seeded random
// subset of them, some torn at a 512-byte boundary (Loss::random_unsynced, a
// disk that reorders its cache); after it every write, truncate, sync and
// delete fails with SQLITE_IOERR, as if the machine had stopped. The real
// files then hold exactly what a disk would after the cut. The -shm file is
// passed through: SQLite never syncs it and rebuilds it after a crash, so the
// test deletes it after the cut.
//
// While registered (for the object's lifetime) it is the process's default
// VFS, so code under test opens files through it unchanged. Every SQLite
// connection on it must be closed before it is destroyed. Thread-safe.
#include <sqlite3.h>

#include <cstdint>
#include <map>
#include <memory>
#include <mutex>
#include <random>
#include <string>
#include <vector>

namespace accrue::testing {

class PowerCutVfs {
 public:
  enum class Loss { all_unsynced, random_unsynced };
  struct Counters {
    std::uint64_t writes = 0;          // xWrite calls before the cut
    std::uint64_t syncs = 0;           // xSync calls that made data durable
    std::uint64_t ops_dropped = 0;     // unsynced writes/truncates lost at the cut
    std::uint64_t ops_kept = 0;        // unsynced ones that reached the disk anyway (random_unsynced)
    std::uint64_t ops_torn = 0;        // of those, written only in part
    std::uint64_t failed_after_cut = 0;
  };

  PowerCutVfs(Loss loss, std::uint64_t seed);
  ~PowerCutVfs();
  PowerCutVfs(const PowerCutVfs&) = delete;
  PowerCutVfs& operator=(const PowerCutVfs&) = delete;

  // The power fails during the n-th xWrite from now (that write is lost too).
  void cut_at_write(std::uint64_t n);
  void cut_now();
  bool is_cut() const;
  Counters counters() const;

  // Used by the file methods (public for the C callbacks only).
  struct Op {
    bool truncate = false;
    std::int64_t offset = 0;  // or the new size
    std::vector<std::uint8_t> data;
  };
  struct FileState {
    std::vector<std::uint8_t> image;  // what SQLite sees
    std::vector<Op> pending;          // not yet durable, in order
    std::vector<sqlite3_file*> handles;  // open real handles, to apply them through
  };
  mutable std::mutex mutex_;
  sqlite3_vfs* real_ = nullptr;
  sqlite3_vfs vfs_{};
  Loss loss_;
  std::mt19937_64 rng_;
  bool cut_ = false;
  std::uint64_t cut_at_ = 0;  // 0: not armed
  Counters counters_;
  std::map<std::string, std::shared_ptr<FileState>> files_;
  void cut_locked();
};

}  // namespace accrue::testing
