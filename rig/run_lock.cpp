#include "rig/run_lock.h"

#include <fcntl.h>
#include <fmt/format.h>
#include <sys/file.h>
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
  std::error_code ec;
  auto tmp = std::filesystem::temp_directory_path(ec);
  return ((ec ? std::filesystem::path("/tmp") : tmp) / "kneepoint-locks").string();
}

Result<std::unique_ptr<RunLock>> RunLock::Acquire(const std::string& key, const std::string& holder, const std::string& dir) {
  std::error_code ec;
  std::filesystem::create_directories(dir, ec);
  if (ec) return IoError(fmt::format("cannot create the lock directory '{}': {}", dir, ec.message()));
  std::string path = (std::filesystem::path(dir) / RunLockFileName(key)).string();
  int fd = open(path.c_str(), O_RDWR | O_CREAT | O_CLOEXEC, 0666);
  if (fd < 0) return IoError(fmt::format("cannot open the rig lock '{}': {}", path, std::strerror(errno)));
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

}  // namespace kp
