// RunLock: one runner per rig. A run (or resume) holds an exclusive advisory
// lock (flock) on a lock file named after the rig's instrument addresses
// (Rig::LockKey()); a second runner on the same addresses is refused with a
// message naming the holder. The kernel drops the lock when the holder dies in
// any way (kill -9 included), so a stale lock file never blocks a new run.
//
// Ownership: the RunLock owns the file descriptor; moving transfers it; the
// lock is released at destruction. Not shared between threads.
#pragma once

#include <memory>
#include <string>
#include <vector>

#include "drivers/status.h"

namespace kp {

class RunLock {
 public:
  // Directory for lock files: $KNEEPOINT_LOCK_DIR (a shared folder owned by
  // root, or your own), else $XDG_RUNTIME_DIR/kneepoint, else
  // <temp dir>/kneepoint-locks-UID.
  static std::string DefaultDir();
  // Takes the lock for `key` in `dir` (created 0700 when missing) without
  // waiting. The folder must be a real directory (not a symlink) of this user
  // or root and not writable by all without the sticky bit; the lock file is
  // opened without following symlinks, created exclusively (0600) when
  // missing, and must be a plain, singly linked file: a planted symlink or
  // foreign file is refused (kPermissionDenied), never written through.
  // `holder` describes this runner for whoever is refused ("run 7 in lab.db").
  // kUnavailable when another process holds it.
  static Result<std::unique_ptr<RunLock>> Acquire(const std::string& key, const std::string& holder,
                                                  const std::string& dir = DefaultDir());
  ~RunLock();
  RunLock(const RunLock&) = delete;
  RunLock& operator=(const RunLock&) = delete;

  // Updates the description others see (e.g. once the run id is known).
  void Describe(const std::string& holder);
  const std::string& path() const { return path_; }

 private:
  RunLock(int fd, std::string path) : fd_(fd), path_(std::move(path)) {}
  int fd_;
  std::string path_;
};

// Takes every key's lock (RunLock::Acquire each, same holder and folder);
// refused as a whole when any is held, nothing kept.
Result<std::vector<std::unique_ptr<RunLock>>> AcquireAll(const std::vector<std::string>& keys, const std::string& holder,
                                                         const std::string& dir = RunLock::DefaultDir());

// The checks Acquire makes on the lock directory (creating its last component).
Status CheckLockDir(const std::string& dir);

// File name for a lock key: readable characters kept, others replaced, plus a
// hash so distinct keys never share a file.
std::string RunLockFileName(const std::string& key);

}  // namespace kp
