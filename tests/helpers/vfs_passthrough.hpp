#pragma once
// The pass-through half of a test VFS shim (power_cut_vfs, failing_vfs): the
// methods a shim does not change, forwarded to the real VFS and its files.
//
// Contract: a shim's file struct (Shim) starts with its sqlite3_file and
// holds the real file's handle in a member `real`; the shim VFS's pAppData
// points at its owner (Owner), whose public `real_` is the VFS it wraps.
// install_passthrough fills every VFS-level method but xOpen (and xDelete,
// when the shim keeps its own), so a shim writes only what it tests.
#include <sqlite3.h>

namespace accrue::testing::vfs_passthrough {

template <class Shim>
sqlite3_file* real(sqlite3_file* f) {
  return reinterpret_cast<Shim*>(f)->real;
}

// File methods.
template <class Shim>
int lock(sqlite3_file* f, int level) {
  return real<Shim>(f)->pMethods->xLock(real<Shim>(f), level);
}
template <class Shim>
int unlock(sqlite3_file* f, int level) {
  return real<Shim>(f)->pMethods->xUnlock(real<Shim>(f), level);
}
template <class Shim>
int check_reserved(sqlite3_file* f, int* out) {
  return real<Shim>(f)->pMethods->xCheckReservedLock(real<Shim>(f), out);
}
template <class Shim>
int sector_size(sqlite3_file* f) {
  return real<Shim>(f)->pMethods->xSectorSize(real<Shim>(f));
}
template <class Shim>
int device_characteristics(sqlite3_file* f) {
  return real<Shim>(f)->pMethods->xDeviceCharacteristics(real<Shim>(f));
}
template <class Shim>
int shm_map(sqlite3_file* f, int page, int size, int extend, void volatile** out) {
  return real<Shim>(f)->pMethods->xShmMap(real<Shim>(f), page, size, extend, out);
}
template <class Shim>
int shm_lock(sqlite3_file* f, int offset, int n, int flags) {
  return real<Shim>(f)->pMethods->xShmLock(real<Shim>(f), offset, n, flags);
}
template <class Shim>
void shm_barrier(sqlite3_file* f) {
  real<Shim>(f)->pMethods->xShmBarrier(real<Shim>(f));
}
template <class Shim>
int shm_unmap(sqlite3_file* f, int delete_flag) {
  return real<Shim>(f)->pMethods->xShmUnmap(real<Shim>(f), delete_flag);
}

// VFS methods.
template <class Owner>
sqlite3_vfs* real_vfs(sqlite3_vfs* vfs) {
  return static_cast<Owner*>(vfs->pAppData)->real_;
}
template <class Owner>
int remove_file(sqlite3_vfs* vfs, const char* name, int sync_dir) {
  return real_vfs<Owner>(vfs)->xDelete(real_vfs<Owner>(vfs), name, sync_dir);
}

// Fills `vfs` as a shim of owner->real_ named `name` whose files take
// shim_file_size bytes before the real file; the caller sets xOpen (and may
// replace xDelete) and registers it.
template <class Owner>
void install_passthrough(sqlite3_vfs& vfs, Owner* owner, const char* name, int shim_file_size) {
  sqlite3_vfs* r = owner->real_;
  vfs.iVersion = 2;
  vfs.szOsFile = shim_file_size + r->szOsFile;
  vfs.mxPathname = r->mxPathname;
  vfs.zName = name;
  vfs.pAppData = owner;
  vfs.xDelete = remove_file<Owner>;
  vfs.xAccess = [](sqlite3_vfs* v, const char* n, int flags, int* out) {
    return real_vfs<Owner>(v)->xAccess(real_vfs<Owner>(v), n, flags, out);
  };
  vfs.xFullPathname = [](sqlite3_vfs* v, const char* n, int size, char* out) {
    return real_vfs<Owner>(v)->xFullPathname(real_vfs<Owner>(v), n, size, out);
  };
  vfs.xRandomness = [](sqlite3_vfs* v, int n, char* out) { return real_vfs<Owner>(v)->xRandomness(real_vfs<Owner>(v), n, out); };
  vfs.xSleep = [](sqlite3_vfs* v, int us) { return real_vfs<Owner>(v)->xSleep(real_vfs<Owner>(v), us); };
  vfs.xCurrentTime = [](sqlite3_vfs* v, double* out) { return real_vfs<Owner>(v)->xCurrentTime(real_vfs<Owner>(v), out); };
  vfs.xGetLastError = [](sqlite3_vfs* v, int n, char* out) {
    return real_vfs<Owner>(v)->xGetLastError(real_vfs<Owner>(v), n, out);
  };
  vfs.xCurrentTimeInt64 = [](sqlite3_vfs* v, sqlite3_int64* out) {
    return real_vfs<Owner>(v)->xCurrentTimeInt64(real_vfs<Owner>(v), out);
  };
}

}  // namespace accrue::testing::vfs_passthrough
