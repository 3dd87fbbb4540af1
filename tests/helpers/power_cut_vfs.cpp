#include "power_cut_vfs.hpp"

#include "vfs_passthrough.hpp"

#include <algorithm>
#include <cstring>
#include <new>

namespace accrue::testing {

namespace {

struct ShimFile {
  sqlite3_file base;
  PowerCutVfs* owner;
  std::shared_ptr<PowerCutVfs::FileState> state;  // null: passed through (shm, temp files)
  sqlite3_file* real;                             // placed after this struct
};

PowerCutVfs* owner_of(sqlite3_vfs* vfs) { return static_cast<PowerCutVfs*>(vfs->pAppData); }
ShimFile* shim(sqlite3_file* f) { return reinterpret_cast<ShimFile*>(f); }
sqlite3_file* real(sqlite3_file* f) { return shim(f)->real; }

// Applies one operation to the real file through a real handle.
int apply(sqlite3_file* disk, const PowerCutVfs::Op& op, std::size_t bytes) {
  if (op.truncate) return disk->pMethods->xTruncate(disk, op.offset);
  return disk->pMethods->xWrite(disk, op.data.data(), int(bytes), op.offset);
}

int x_close(sqlite3_file* f) {
  ShimFile* s = shim(f);
  if (s->state) {
    std::lock_guard lock(s->owner->mutex_);
    auto& h = s->state->handles;
    h.erase(std::remove(h.begin(), h.end(), s->real), h.end());
    s->state.reset();
  }
  s->state.~shared_ptr();
  return s->real->pMethods->xClose(s->real);
}

int x_read(sqlite3_file* f, void* out, int n, sqlite3_int64 offset) {
  ShimFile* s = shim(f);
  if (!s->state) return s->real->pMethods->xRead(s->real, out, n, offset);
  std::lock_guard lock(s->owner->mutex_);
  const auto& image = s->state->image;
  const std::int64_t size = std::int64_t(image.size());
  const std::int64_t have = std::clamp<std::int64_t>(size - offset, 0, n);
  if (have > 0) std::memcpy(out, image.data() + offset, std::size_t(have));
  if (have < n) {
    std::memset(static_cast<char*>(out) + have, 0, std::size_t(n - have));  // SQLite requires the zero fill
    return SQLITE_IOERR_SHORT_READ;
  }
  return SQLITE_OK;
}

int x_write(sqlite3_file* f, const void* data, int n, sqlite3_int64 offset) {
  ShimFile* s = shim(f);
  if (!s->state) return s->real->pMethods->xWrite(s->real, data, n, offset);
  PowerCutVfs& o = *s->owner;
  std::lock_guard lock(o.mutex_);
  if (!o.cut_ && ++o.counters_.writes >= o.cut_at_ && o.cut_at_ != 0) o.cut_locked();
  if (o.cut_) {
    ++o.counters_.failed_after_cut;
    return SQLITE_IOERR_WRITE;
  }
  auto& image = s->state->image;
  if (image.size() < std::size_t(offset + n)) image.resize(std::size_t(offset + n), 0);
  std::memcpy(image.data() + offset, data, std::size_t(n));
  PowerCutVfs::Op op;
  op.offset = offset;
  op.data.assign(static_cast<const std::uint8_t*>(data), static_cast<const std::uint8_t*>(data) + n);
  s->state->pending.push_back(std::move(op));
  return SQLITE_OK;
}

int x_truncate(sqlite3_file* f, sqlite3_int64 size) {
  ShimFile* s = shim(f);
  if (!s->state) return s->real->pMethods->xTruncate(s->real, size);
  std::lock_guard lock(s->owner->mutex_);
  if (s->owner->cut_) {
    ++s->owner->counters_.failed_after_cut;
    return SQLITE_IOERR_TRUNCATE;
  }
  s->state->image.resize(std::size_t(size), 0);
  PowerCutVfs::Op op;
  op.truncate = true;
  op.offset = size;
  s->state->pending.push_back(std::move(op));
  return SQLITE_OK;
}

int x_sync(sqlite3_file* f, int flags) {
  ShimFile* s = shim(f);
  if (!s->state) return s->real->pMethods->xSync(s->real, flags);
  std::lock_guard lock(s->owner->mutex_);
  if (s->owner->cut_) {
    ++s->owner->counters_.failed_after_cut;
    return SQLITE_IOERR_FSYNC;
  }
  for (const auto& op : s->state->pending)
    if (int rc = apply(s->real, op, op.data.size()); rc != SQLITE_OK) return rc;
  s->state->pending.clear();
  if (int rc = s->real->pMethods->xSync(s->real, flags); rc != SQLITE_OK) return rc;
  ++s->owner->counters_.syncs;
  return SQLITE_OK;
}

int x_file_size(sqlite3_file* f, sqlite3_int64* size) {
  ShimFile* s = shim(f);
  if (!s->state) return s->real->pMethods->xFileSize(s->real, size);
  std::lock_guard lock(s->owner->mutex_);
  *size = sqlite3_int64(s->state->image.size());
  return SQLITE_OK;
}

int x_file_control(sqlite3_file* f, int op, void* arg) {
  // Size hints and chunk sizes would grow the real file behind the image's back.
  if (shim(f)->state && (op == SQLITE_FCNTL_SIZE_HINT || op == SQLITE_FCNTL_CHUNK_SIZE)) return SQLITE_OK;
  return real(f)->pMethods->xFileControl(real(f), op, arg);
}

// Version 2: the shared-memory methods, no memory-mapped I/O (xFetch), so every
// read of the database goes through x_read and sees the image.
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
  PowerCutVfs* o = owner_of(vfs);
  ShimFile* s = shim(f);
  s->owner = o;
  new (&s->state) std::shared_ptr<PowerCutVfs::FileState>();
  s->real = reinterpret_cast<sqlite3_file*>(s + 1);
  f->pMethods = nullptr;
  const int rc = o->real_->xOpen(o->real_, name, s->real, flags, out_flags);
  if (rc != SQLITE_OK) {
    s->state.~shared_ptr();
    return rc;
  }
  const bool modelled = name && (flags & (SQLITE_OPEN_MAIN_DB | SQLITE_OPEN_WAL | SQLITE_OPEN_MAIN_JOURNAL));
  if (modelled) {
    std::lock_guard lock(o->mutex_);
    auto& slot = o->files_[name];
    if (!slot) {
      // First open: the image starts as what the disk holds.
      slot = std::make_shared<PowerCutVfs::FileState>();
      sqlite3_int64 size = 0;
      int r = s->real->pMethods->xFileSize(s->real, &size);
      if (r == SQLITE_OK && size > 0) {
        slot->image.resize(std::size_t(size));
        r = s->real->pMethods->xRead(s->real, slot->image.data(), int(size), 0);
      }
      if (r != SQLITE_OK) {
        o->files_.erase(name);
        s->real->pMethods->xClose(s->real);
        s->state.~shared_ptr();
        return r;
      }
    }
    slot->handles.push_back(s->real);
    s->state = slot;
  }
  f->pMethods = &kMethods;
  return SQLITE_OK;
}

int x_delete(sqlite3_vfs* vfs, const char* name, int sync_dir) {
  PowerCutVfs* o = owner_of(vfs);
  {
    std::lock_guard lock(o->mutex_);
    if (o->cut_) {
      ++o->counters_.failed_after_cut;
      return SQLITE_IOERR_DELETE;
    }
    o->files_.erase(name);
  }
  return o->real_->xDelete(o->real_, name, sync_dir);
}


}  // namespace

PowerCutVfs::PowerCutVfs(Loss loss, std::uint64_t seed) : loss_(loss), rng_(seed) {
  real_ = sqlite3_vfs_find(nullptr);
  vfs_passthrough::install_passthrough(vfs_, this, "accrue_power_cut", int(sizeof(ShimFile)));
  vfs_.xOpen = x_open;
  vfs_.xDelete = x_delete;
  sqlite3_vfs_register(&vfs_, 1);
}

PowerCutVfs::~PowerCutVfs() {
  sqlite3_vfs_unregister(&vfs_);
  // The old default becomes the default again.
  sqlite3_vfs_register(real_, 1);
}

void PowerCutVfs::cut_at_write(std::uint64_t n) {
  std::lock_guard lock(mutex_);
  cut_at_ = counters_.writes + std::max<std::uint64_t>(n, 1);
}

void PowerCutVfs::cut_now() {
  std::lock_guard lock(mutex_);
  if (!cut_) cut_locked();
}

bool PowerCutVfs::is_cut() const {
  std::lock_guard lock(mutex_);
  return cut_;
}

PowerCutVfs::Counters PowerCutVfs::counters() const {
  std::lock_guard lock(mutex_);
  return counters_;
}

void PowerCutVfs::cut_locked() {
  cut_ = true;
  for (auto& [name, state] : files_) {
    for (const Op& op : state->pending) {
      if (loss_ == Loss::all_unsynced || state->handles.empty()) {
        ++counters_.ops_dropped;
        continue;
      }
      const auto roll = rng_() % 4;  // dropped, dropped, kept whole, torn
      if (roll < 2) {
        ++counters_.ops_dropped;
        continue;
      }
      std::size_t bytes = op.data.size();
      if (roll == 3 && !op.truncate && bytes > 512) {
        bytes = 512 * (1 + rng_() % ((bytes - 1) / 512));  // a sector-aligned prefix
        ++counters_.ops_torn;
      }
      (void)apply(state->handles.front(), op, bytes);  // the cut model's own write; the disk is what it is
      ++counters_.ops_kept;
    }
    state->pending.clear();
  }
}

}  // namespace accrue::testing
