#include "tests/support/faulty_vfs.h"

#include <cstring>

namespace kp::testing {
namespace {

struct File {
  sqlite3_file base;
  FaultyVfs* owner;
  sqlite3_file* real;  // lives right after this struct
};

sqlite3_file* Real(sqlite3_file* f) { return reinterpret_cast<File*>(f)->real; }
FaultyVfs* Owner(sqlite3_vfs* v) { return static_cast<FaultyVfs*>(v->pAppData); }

int Close(sqlite3_file* f) { return Real(f)->pMethods ? Real(f)->pMethods->xClose(Real(f)) : SQLITE_OK; }
int Read(sqlite3_file* f, void* buf, int n, sqlite3_int64 off) { return Real(f)->pMethods->xRead(Real(f), buf, n, off); }
int Write(sqlite3_file* f, const void* buf, int n, sqlite3_int64 off) {
  int rc = reinterpret_cast<File*>(f)->owner->OnWrite();
  if (rc != SQLITE_OK) return rc;
  return Real(f)->pMethods->xWrite(Real(f), buf, n, off);
}
int Truncate(sqlite3_file* f, sqlite3_int64 size) { return Real(f)->pMethods->xTruncate(Real(f), size); }
int Sync(sqlite3_file* f, int flags) {
  if (reinterpret_cast<File*>(f)->owner->skip_sync()) return SQLITE_OK;
  return Real(f)->pMethods->xSync(Real(f), flags);
}
int FileSize(sqlite3_file* f, sqlite3_int64* size) { return Real(f)->pMethods->xFileSize(Real(f), size); }
int Lock(sqlite3_file* f, int l) { return Real(f)->pMethods->xLock(Real(f), l); }
int Unlock(sqlite3_file* f, int l) { return Real(f)->pMethods->xUnlock(Real(f), l); }
int CheckReservedLock(sqlite3_file* f, int* out) { return Real(f)->pMethods->xCheckReservedLock(Real(f), out); }
int FileControl(sqlite3_file* f, int op, void* arg) { return Real(f)->pMethods->xFileControl(Real(f), op, arg); }
int SectorSize(sqlite3_file* f) { return Real(f)->pMethods->xSectorSize(Real(f)); }
int DeviceCharacteristics(sqlite3_file* f) { return Real(f)->pMethods->xDeviceCharacteristics(Real(f)); }
int ShmMap(sqlite3_file* f, int pg, int pgsz, int extend, void volatile** p) {
  return Real(f)->pMethods->xShmMap(Real(f), pg, pgsz, extend, p);
}
int ShmLock(sqlite3_file* f, int offset, int n, int flags) { return Real(f)->pMethods->xShmLock(Real(f), offset, n, flags); }
void ShmBarrier(sqlite3_file* f) { Real(f)->pMethods->xShmBarrier(Real(f)); }
int ShmUnmap(sqlite3_file* f, int del) { return Real(f)->pMethods->xShmUnmap(Real(f), del); }
// No memory-mapped I/O through the wrapper: every write must pass xWrite.
int Fetch(sqlite3_file*, sqlite3_int64, int, void** p) {
  *p = nullptr;
  return SQLITE_OK;
}
int Unfetch(sqlite3_file*, sqlite3_int64, void*) { return SQLITE_OK; }

const sqlite3_io_methods kMethods = {3,
                                     Close,
                                     Read,
                                     Write,
                                     Truncate,
                                     Sync,
                                     FileSize,
                                     Lock,
                                     Unlock,
                                     CheckReservedLock,
                                     FileControl,
                                     SectorSize,
                                     DeviceCharacteristics,
                                     ShmMap,
                                     ShmLock,
                                     ShmBarrier,
                                     ShmUnmap,
                                     Fetch,
                                     Unfetch};

int Open(sqlite3_vfs* v, const char* name, sqlite3_file* f, int flags, int* out_flags) {
  FaultyVfs* owner = Owner(v);
  File* file = reinterpret_cast<File*>(f);
  file->owner = owner;
  file->real = reinterpret_cast<sqlite3_file*>(file + 1);
  std::memset(file->real, 0, static_cast<size_t>(owner->real()->szOsFile));
  int rc = owner->real()->xOpen(owner->real(), name, file->real, flags, out_flags);
  file->base.pMethods = file->real->pMethods ? &kMethods : nullptr;
  return rc;
}
int Delete(sqlite3_vfs* v, const char* name, int sync) { return Owner(v)->real()->xDelete(Owner(v)->real(), name, sync); }
int Access(sqlite3_vfs* v, const char* name, int flags, int* out) {
  return Owner(v)->real()->xAccess(Owner(v)->real(), name, flags, out);
}
int FullPathname(sqlite3_vfs* v, const char* name, int n, char* out) {
  return Owner(v)->real()->xFullPathname(Owner(v)->real(), name, n, out);
}
void* DlOpen(sqlite3_vfs* v, const char* p) { return Owner(v)->real()->xDlOpen(Owner(v)->real(), p); }
void DlError(sqlite3_vfs* v, int n, char* msg) { Owner(v)->real()->xDlError(Owner(v)->real(), n, msg); }
void (*DlSym(sqlite3_vfs* v, void* h, const char* s))(void) { return Owner(v)->real()->xDlSym(Owner(v)->real(), h, s); }
void DlClose(sqlite3_vfs* v, void* h) { Owner(v)->real()->xDlClose(Owner(v)->real(), h); }
int Randomness(sqlite3_vfs* v, int n, char* out) { return Owner(v)->real()->xRandomness(Owner(v)->real(), n, out); }
int Sleep(sqlite3_vfs* v, int us) { return Owner(v)->real()->xSleep(Owner(v)->real(), us); }
int CurrentTime(sqlite3_vfs* v, double* t) { return Owner(v)->real()->xCurrentTime(Owner(v)->real(), t); }
int GetLastError(sqlite3_vfs* v, int n, char* s) { return Owner(v)->real()->xGetLastError(Owner(v)->real(), n, s); }
int CurrentTimeInt64(sqlite3_vfs* v, sqlite3_int64* t) { return Owner(v)->real()->xCurrentTimeInt64(Owner(v)->real(), t); }

}  // namespace

FaultyVfs::FaultyVfs(std::string name, bool skip_sync) : name_(std::move(name)), skip_sync_(skip_sync) {
  real_ = sqlite3_vfs_find(nullptr);
  vfs_.iVersion = 2;
  vfs_.szOsFile = static_cast<int>(sizeof(File)) + real_->szOsFile;
  vfs_.mxPathname = real_->mxPathname;
  vfs_.zName = name_.c_str();
  vfs_.pAppData = this;
  vfs_.xOpen = Open;
  vfs_.xDelete = Delete;
  vfs_.xAccess = Access;
  vfs_.xFullPathname = FullPathname;
  vfs_.xDlOpen = DlOpen;
  vfs_.xDlError = DlError;
  vfs_.xDlSym = DlSym;
  vfs_.xDlClose = DlClose;
  vfs_.xRandomness = Randomness;
  vfs_.xSleep = Sleep;
  vfs_.xCurrentTime = CurrentTime;
  vfs_.xGetLastError = GetLastError;
  vfs_.xCurrentTimeInt64 = CurrentTimeInt64;
  sqlite3_vfs_register(&vfs_, 0);
}

FaultyVfs::~FaultyVfs() { sqlite3_vfs_unregister(&vfs_); }

void FaultyVfs::FailWrite(int64_t n, int rc, bool one_shot) {
  writes_ = 0;
  failed_ = 0;
  rc_ = rc;
  one_shot_ = one_shot;
  fail_at_ = n;
}

void FaultyVfs::Heal() {
  fail_at_ = 0;
  writes_ = 0;
  failed_ = 0;
}

int FaultyVfs::OnWrite() {
  int64_t n = ++writes_;
  int64_t at = fail_at_.load();
  if (at <= 0 || n < at || (one_shot_ && n != at)) return SQLITE_OK;
  ++failed_;
  return rc_.load();
}

}  // namespace kp::testing
