#pragma once
// FailingVfs: an SQLite VFS for tests that passes everything through to the
// default VFS until fail_from_now(code) is called; from then on every write,
// truncate and sync of a database, WAL or journal file returns that code
// (SQLITE_IOERR_WRITE models a read-only remount or a dying disk, whose write()
// fails with EROFS or EIO; SQLITE_FULL a full disk) until heal(). Reads, locks
// and the -shm file keep working, as they do on a read-only remount. Nothing is
// buffered or dropped: unlike PowerCutVfs it models failing storage, not lost
// power. While registered (for the object's lifetime) it is the process's
// default VFS; every connection on it must be closed before it is destroyed.
// Thread-safe.
#include <sqlite3.h>

#include <atomic>
#include <cstdint>

namespace accrue::testing {

class FailingVfs {
 public:
  FailingVfs();
  ~FailingVfs();
  FailingVfs(const FailingVfs&) = delete;
  FailingVfs& operator=(const FailingVfs&) = delete;

  void fail_from_now(int sqlite_code) { code_.store(sqlite_code); }
  void heal() { code_.store(SQLITE_OK); }
  // Writes, truncates and syncs refused since the object was made.
  std::uint64_t refused() const { return refused_.load(); }

  // Used by the file methods (public for the C callbacks only).
  sqlite3_vfs* real_ = nullptr;
  sqlite3_vfs vfs_{};
  std::atomic<int> code_{SQLITE_OK};
  std::atomic<std::uint64_t> refused_{0};
};

}  // namespace accrue::testing
