#include "failing_vfs.hpp"

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
int x_lock(sqlite3_file* f, int level) { return real(f)->pMethods->xLock(real(f), level); }
int x_unlock(sqlite3_file* f, int level) { return real(f)->pMethods->xUnlock(real(f), level); }
int x_check_reserved(sqlite3_file* f, int* out) { return real(f)->pMethods->xCheckReservedLock(real(f), out); }
int x_file_control(sqlite3_file* f, int op, void* arg) { return real(f)->pMethods->xFileControl(real(f), op, arg); }
int x_sector_size(sqlite3_file* f) { return real(f)->pMethods->xSectorSize(real(f)); }
int x_device_characteristics(sqlite3_file* f) { return real(f)->pMethods->xDeviceCharacteristics(real(f)); }
int x_shm_map(sqlite3_file* f, int page, int size, int extend, void volatile** out) {
  return real(f)->pMethods->xShmMap(real(f), page, size, extend, out);
}
int x_shm_lock(sqlite3_file* f, int offset, int n, int flags) {
  return real(f)->pMethods->xShmLock(real(f), offset, n, flags);
}
void x_shm_barrier(sqlite3_file* f) { real(f)->pMethods->xShmBarrier(real(f)); }
int x_shm_unmap(sqlite3_file* f, int delete_flag) { return real(f)->pMethods->xShmUnmap(real(f), delete_flag); }

// Version 2: shared memory, no memory-mapped I/O, so every write goes through x_write.
const sqlite3_io_methods kMethods = {
    2,           x_close,  x_read,   x_write,          x_truncate,     x_sync,
    x_file_size, x_lock,   x_unlock, x_check_reserved, x_file_control, x_sector_size,
    x_device_characteristics, x_shm_map, x_shm_lock, x_shm_barrier, x_shm_unmap,
    nullptr,     nullptr};

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

int x_delete(sqlite3_vfs* vfs, const char* name, int sync_dir) {
  return owner_of(vfs)->real_->xDelete(owner_of(vfs)->real_, name, sync_dir);
}
int x_access(sqlite3_vfs* vfs, const char* name, int flags, int* out) {
  return owner_of(vfs)->real_->xAccess(owner_of(vfs)->real_, name, flags, out);
}
int x_full_pathname(sqlite3_vfs* vfs, const char* name, int n, char* out) {
  return owner_of(vfs)->real_->xFullPathname(owner_of(vfs)->real_, name, n, out);
}
int x_randomness(sqlite3_vfs* vfs, int n, char* out) { return owner_of(vfs)->real_->xRandomness(owner_of(vfs)->real_, n, out); }
int x_sleep(sqlite3_vfs* vfs, int us) { return owner_of(vfs)->real_->xSleep(owner_of(vfs)->real_, us); }
int x_current_time(sqlite3_vfs* vfs, double* out) { return owner_of(vfs)->real_->xCurrentTime(owner_of(vfs)->real_, out); }
int x_last_error(sqlite3_vfs* vfs, int n, char* out) {
  return owner_of(vfs)->real_->xGetLastError(owner_of(vfs)->real_, n, out);
}
int x_current_time64(sqlite3_vfs* vfs, sqlite3_int64* out) {
  return owner_of(vfs)->real_->xCurrentTimeInt64(owner_of(vfs)->real_, out);
}

}  // namespace

FailingVfs::FailingVfs() {
  real_ = sqlite3_vfs_find(nullptr);
  vfs_.iVersion = 2;
  vfs_.szOsFile = int(sizeof(ShimFile)) + real_->szOsFile;
  vfs_.mxPathname = real_->mxPathname;
  vfs_.zName = "accrue_failing";
  vfs_.pAppData = this;
  vfs_.xOpen = x_open;
  vfs_.xDelete = x_delete;
  vfs_.xAccess = x_access;
  vfs_.xFullPathname = x_full_pathname;
  vfs_.xRandomness = x_randomness;
  vfs_.xSleep = x_sleep;
  vfs_.xCurrentTime = x_current_time;
  vfs_.xGetLastError = x_last_error;
  vfs_.xCurrentTimeInt64 = x_current_time64;
  sqlite3_vfs_register(&vfs_, 1);
}

FailingVfs::~FailingVfs() {
  sqlite3_vfs_unregister(&vfs_);
  sqlite3_vfs_register(real_, 1);  // the old default becomes the default again
}

}  // namespace accrue::testing
