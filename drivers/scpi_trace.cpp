#include "drivers/scpi_trace.h"

#include <chrono>
#include <cerrno>
#include <cstdio>
#include <cstring>
#include <ctime>
#include <memory>
#include <mutex>

#include <fmt/format.h>

namespace kp {
namespace {

// Lost lines of every trace file, by path, until TakeTraceWriteErrors.
std::mutex g_lost_mu;
std::string g_lost;

void NoteLost(const std::string& path, int err) {
  std::lock_guard<std::mutex> lock(g_lost_mu);
  std::string entry = fmt::format("trace file '{}': a line was lost: {}", path, std::strerror(err));
  if (g_lost.find(entry) == std::string::npos) g_lost += (g_lost.empty() ? "" : "; ") + entry;
}

struct TraceFile {
  std::mutex mu;
  std::string path;
  std::FILE* f = nullptr;
  ~TraceFile() {
    if (f != nullptr) std::fclose(f);
  }
};

std::string WallStamp() {
  auto now = std::chrono::system_clock::now();
  std::time_t t = std::chrono::system_clock::to_time_t(now);
  auto ms = std::chrono::duration_cast<std::chrono::milliseconds>(now.time_since_epoch()).count() % 1000;
  std::tm tm{};
  gmtime_r(&t, &tm);
  char buf[32];
  std::strftime(buf, sizeof buf, "%Y-%m-%dT%H:%M:%S", &tm);
  return fmt::format("{}.{:03}Z", buf, ms);
}

}  // namespace

Result<ScpiTraceHook> OpenTraceFile(const std::string& path) {
  auto file = std::make_shared<TraceFile>();
  file->path = path;
  file->f = std::fopen(path.c_str(), "a");
  if (file->f == nullptr) return IoError(fmt::format("cannot open trace file '{}': {}", path, std::strerror(errno)));
  return ScpiTraceHook([file](Seconds at, char direction, const std::string& address, std::string_view text) {
    std::string line = fmt::format("{}  t={:.3f}s  {}  {}  {}\n", WallStamp(), at.count(), address, direction, text);
    std::lock_guard<std::mutex> lock(file->mu);
    errno = 0;
    if (std::fputs(line.c_str(), file->f) < 0 || std::fflush(file->f) != 0 || std::ferror(file->f)) {
      NoteLost(file->path, errno != 0 ? errno : EIO);
      std::clearerr(file->f);
    }
  });
}

std::string TakeTraceWriteErrors() {
  std::lock_guard<std::mutex> lock(g_lost_mu);
  std::string out;
  out.swap(g_lost);
  return out;
}

}  // namespace kp
