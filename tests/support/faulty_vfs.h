// FaultyVfs: a wrapper SQLite VFS for disk-trouble tests. Registered under its
// own name (never as the default), it forwards everything to the default VFS
// and, once armed, fails writes with a chosen SQLite error: SQLITE_FULL for a
// full disk, SQLITE_IOERR_WRITE for a failing device, SQLITE_READONLY for a
// file that became read-only. Open a Store on it with Store::Options::vfs.
//
// One instance at a time per name; not thread-safe to re-arm while a
// connection writes.
#pragma once

#include <sqlite3.h>

#include <atomic>
#include <cstdint>
#include <string>

namespace kp::testing {

class FaultyVfs {
 public:
  // `skip_sync`: make xSync a no-op (faster loops; durability is not under test).
  explicit FaultyVfs(std::string name = "kp-faulty", bool skip_sync = true);
  ~FaultyVfs();
  FaultyVfs(const FaultyVfs&) = delete;
  FaultyVfs& operator=(const FaultyVfs&) = delete;

  const std::string& name() const { return name_; }
  // Fails the n-th write from now (1-based) with `rc`, and every later one
  // too unless `one_shot`.
  void FailWrite(int64_t n, int rc, bool one_shot = false);
  void Heal();
  // Writes seen since the last FailWrite / Heal, and how many were failed.
  int64_t writes() const { return writes_.load(); }
  int64_t failed() const { return failed_.load(); }

  // For the C callbacks.
  struct Hooks;
  int OnWrite();
  bool skip_sync() const { return skip_sync_; }
  sqlite3_vfs* real() const { return real_; }

 private:
  std::string name_;
  bool skip_sync_;
  sqlite3_vfs* real_ = nullptr;
  sqlite3_vfs vfs_{};
  std::atomic<int64_t> writes_{0};
  std::atomic<int64_t> failed_{0};
  std::atomic<int64_t> fail_at_{0};  // 0: never
  std::atomic<int> rc_{SQLITE_OK};
  std::atomic<bool> one_shot_{false};
};

}  // namespace kp::testing
