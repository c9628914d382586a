#include "rig/run_lock.h"

#include <fcntl.h>
#include <fmt/format.h>
#include <sys/file.h>
#include <sys/stat.h>
#include <unistd.h>

#include <cerrno>
#include <cstdlib>
#include <cstring>
#include <filesystem>

namespace kp {
namespace {

uint64_t Fnv1a(const std::string& s) {
  uint64_t h = 1469598103934665603ull;
  for (unsigned char c : s) {
    h ^= c;
    h *= 1099511628211ull;
  }
  return h;
}

std::string ReadAll(int fd) {
  std::string out;
  char buf[512];
  if (lseek(fd, 0, SEEK_SET) < 0) return out;
  for (;;) {
    ssize_t n = read(fd, buf, sizeof buf);
    if (n <= 0) break;
    out.append(buf, static_cast<size_t>(n));
    if (out.size() > 4096) break;
  }
  while (!out.empty() && (out.back() == '\n' || out.back() == '\0')) out.pop_back();
  return out;
}

}  // namespace

std::string RunLockFileName(const std::string& key) {
  std::string safe;
  for (char c : key.substr(0, 48)) safe += (std::isalnum(static_cast<unsigned char>(c)) || c == '-' || c == '.') ? c : '_';
  return fmt::format("{}-{:016x}.lock", safe, Fnv1a(key));
}

std::string RunLock::DefaultDir() {
  if (const char* d = std::getenv("KNEEPOINT_LOCK_DIR"); d != nullptr && *d != '\0') return d;
  // Per user: nobody else can create, replace or block it.
  if (const char* x = std::getenv("XDG_RUNTIME_DIR"); x != nullptr && *x == '/') return (std::filesystem::path(x) / "kneepoint").string();
  std::error_code ec;
  auto tmp = std::filesystem::temp_directory_path(ec);
  return ((ec ? std::filesystem::path("/tmp") : tmp) / fmt::format("kneepoint-locks-{}", static_cast<unsigned long>(getuid()))).string();
}

Status CheckLockDir(const std::string& dir) {
  // The last component is created here (0700) when missing; its parents must exist.
  if (mkdir(dir.c_str(), 0700) != 0 && errno != EEXIST)
    return IoError(fmt::format("cannot create the lock directory '{}': {}", dir, std::strerror(errno)));
  struct stat st {};
  if (lstat(dir.c_str(), &st) != 0) return IoError(fmt::format("cannot inspect the lock directory '{}': {}", dir, std::strerror(errno)));
  if (S_ISLNK(st.st_mode)) return IoError(fmt::format("the lock directory '{}' is a symbolic link; refusing to use it", dir));
  if (!S_ISDIR(st.st_mode)) return IoError(fmt::format("the lock directory '{}' is not a directory", dir));
  if (st.st_uid != getuid() && st.st_uid != 0)
    return IoError(fmt::format("the lock directory '{}' belongs to another user (uid {}); set KNEEPOINT_LOCK_DIR to a folder of "
                                        "yours or a shared one owned by root",
                                        dir, static_cast<unsigned long>(st.st_uid)));
  if ((st.st_mode & S_IWOTH) != 0 && (st.st_mode & S_ISVTX) == 0)
    return IoError(fmt::format("the lock directory '{}' is writable by everyone without the sticky bit; refusing to use it", dir));
  return Status::Ok();
}

namespace {
// Opens (creating exclusively when missing) a regular lock file without
// following a symbolic link; a hard-linked or foreign file is refused.
Result<int> OpenLockFile(const std::string& path) {
  for (int attempt = 0; attempt < 4; ++attempt) {
    int fd = open(path.c_str(), O_RDWR | O_NOFOLLOW | O_CLOEXEC | O_NONBLOCK);
    if (fd < 0 && errno == ENOENT) {
      fd = open(path.c_str(), O_RDWR | O_CREAT | O_EXCL | O_NOFOLLOW | O_CLOEXEC, 0600);
      if (fd < 0 && errno == EEXIST) continue;  // another runner created it first: open that one
    }
    if (fd < 0) {
      if (errno == ELOOP) return IoError(fmt::format("the rig lock '{}' is a symbolic link; refusing to follow it", path));
      return IoError(fmt::format("cannot open the rig lock '{}': {}", path, std::strerror(errno)));
    }
    struct stat st {};
    if (fstat(fd, &st) != 0 || !S_ISREG(st.st_mode) || st.st_nlink != 1 || (st.st_uid != getuid() && st.st_uid != 0)) {
      close(fd);
      return IoError(fmt::format("the rig lock '{}' is not a plain file of this user; refusing to use it", path));
    }
    return fd;
  }
  return IoError(fmt::format("cannot create the rig lock '{}'", path));
}
}  // namespace

Result<std::unique_ptr<RunLock>> RunLock::Acquire(const std::string& key, const std::string& holder, const std::string& dir) {
  KP_RETURN_IF_ERROR(CheckLockDir(dir));
  std::string path = (std::filesystem::path(dir) / RunLockFileName(key)).string();
  KP_ASSIGN_OR_RETURN(int fd, OpenLockFile(path));
  if (flock(fd, LOCK_EX | LOCK_NB) != 0) {
    int err = errno;
    std::string who = ReadAll(fd);
    close(fd);
    if (err == EWOULDBLOCK) {
      return Unavailable(
          fmt::format("rig '{}' is already driven by another kneepoint ({}); one runner per rig — stop that run "
                      "first (kneepoint abort RUN) or wait for it to end",
                      key, who.empty() ? "holder unknown" : who));
    }
    return IoError(fmt::format("cannot lock '{}': {}", path, std::strerror(err)));
  }
  std::unique_ptr<RunLock> lock(new RunLock(fd, path));
  lock->Describe(holder);
  return lock;
}

void RunLock::Describe(const std::string& holder) {
  std::string text = fmt::format("pid {}: {}\n", getpid(), holder);
  if (ftruncate(fd_, 0) == 0 && lseek(fd_, 0, SEEK_SET) == 0) {
    ssize_t n = write(fd_, text.data(), text.size());
    (void)n;  // the description is a courtesy; the lock itself is what counts
  }
}

RunLock::~RunLock() {
  // Closing the descriptor releases the flock. The file stays: removing it
  // would race with a runner that just opened it.
  close(fd_);
}

Result<std::vector<std::unique_ptr<RunLock>>> AcquireAll(const std::vector<std::string>& keys, const std::string& holder,
                                                         const std::string& dir) {
  std::vector<std::unique_ptr<RunLock>> locks;
  for (const std::string& key : keys) {
    Result<std::unique_ptr<RunLock>> l = RunLock::Acquire(key, holder, dir);
    if (!l.ok()) return l.status();  // the ones taken are released here
    locks.push_back(std::move(*l));
  }
  return locks;
}

}  // namespace kp
