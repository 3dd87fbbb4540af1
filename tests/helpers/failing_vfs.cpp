#include "failing_vfs.hpp"

#include "vfs_passthrough.hpp"

#include <new>

namespace accrue::testing {

namespace {

struct ShimFile {
  sqlite3_file base;
  FailingVfs* owner;
  bool guarded;        // database, WAL or journal: writes may be refused
  sqlite3_file* real;  // placed after this struct
};

FailingVfs* owner_of(sqlite3_vfs* vfs) { return static_cast<FailingVfs*>(vfs->pAppData); }
ShimFile* shim(sqlite3_file* f) { return reinterpret_cast<ShimFile*>(f); }
sqlite3_file* real(sqlite3_file* f) { return shim(f)->real; }

// The code to refuse with, or SQLITE_OK to pass through.
int refusal(sqlite3_file* f) {
  ShimFile* s = shim(f);
  if (!s->guarded) return SQLITE_OK;
  const int code = s->owner->code_.load();
  if (code != SQLITE_OK) ++s->owner->refused_;
  return code;
}

int x_close(sqlite3_file* f) { return real(f)->pMethods->xClose(real(f)); }
int x_read(sqlite3_file* f, void* out, int n, sqlite3_int64 offset) {
  return real(f)->pMethods->xRead(real(f), out, n, offset);
}
int x_write(sqlite3_file* f, const void* data, int n, sqlite3_int64 offset) {
  if (int rc = refusal(f); rc != SQLITE_OK) return rc;
  return real(f)->pMethods->xWrite(real(f), data, n, offset);
}
int x_truncate(sqlite3_file* f, sqlite3_int64 size) {
  if (int rc = refusal(f); rc != SQLITE_OK) return rc == SQLITE_IOERR_WRITE ? SQLITE_IOERR_TRUNCATE : rc;
  return real(f)->pMethods->xTruncate(real(f), size);
}
int x_sync(sqlite3_file* f, int flags) {
  if (int rc = refusal(f); rc != SQLITE_OK) return rc == SQLITE_IOERR_WRITE ? SQLITE_IOERR_FSYNC : rc;
  return real(f)->pMethods->xSync(real(f), flags);
}
int x_file_size(sqlite3_file* f, sqlite3_int64* size) { return real(f)->pMethods->xFileSize(real(f), size); }
int x_file_control(sqlite3_file* f, int op, void* arg) { return real(f)->pMethods->xFileControl(real(f), op, arg); }

// Version 2: shared memory, no memory-mapped I/O, so every write goes through x_write.
const sqlite3_io_methods kMethods = {
    2,  // iVersion
    x_close,
    x_read,
    x_write,
    x_truncate,
    x_sync,
    x_file_size,
    vfs_passthrough::lock<ShimFile>,
    vfs_passthrough::unlock<ShimFile>,
    vfs_passthrough::check_reserved<ShimFile>,
    x_file_control,
    vfs_passthrough::sector_size<ShimFile>,
    vfs_passthrough::device_characteristics<ShimFile>,
    vfs_passthrough::shm_map<ShimFile>,
    vfs_passthrough::shm_lock<ShimFile>,
    vfs_passthrough::shm_barrier<ShimFile>,
    vfs_passthrough::shm_unmap<ShimFile>,
    nullptr,  // xFetch
    nullptr,  // xUnfetch
};

int x_open(sqlite3_vfs* vfs, const char* name, sqlite3_file* f, int flags, int* out_flags) {
  FailingVfs* o = owner_of(vfs);
  ShimFile* s = shim(f);
  s->owner = o;
  s->guarded = (flags & (SQLITE_OPEN_MAIN_DB | SQLITE_OPEN_WAL | SQLITE_OPEN_MAIN_JOURNAL)) != 0;
  s->real = reinterpret_cast<sqlite3_file*>(s + 1);
  f->pMethods = nullptr;
  const int rc = o->real_->xOpen(o->real_, name, s->real, flags, out_flags);
  if (rc != SQLITE_OK) return rc;
  f->pMethods = &kMethods;
  return SQLITE_OK;
}


}  // namespace

FailingVfs::FailingVfs() {
  real_ = sqlite3_vfs_find(nullptr);
  vfs_passthrough::install_passthrough(vfs_, this, "accrue_failing", int(sizeof(ShimFile)));
  vfs_.xOpen = x_open;
  sqlite3_vfs_register(&vfs_, 1);
}

FailingVfs::~FailingVfs() {
  sqlite3_vfs_unregister(&vfs_);
  sqlite3_vfs_register(real_, 1);  // the old default becomes the default again
}

}  // namespace accrue::testing
