// Helpers shared by the test suites.
#pragma once

#include <gtest/gtest.h>

#include <deque>
#include <filesystem>
#include <functional>
#include <string>

#include "drivers/status.h"
#include "drivers/transport.h"

#define ASSERT_OK(expr)                                        \
  do {                                                         \
    const ::kp::Status kp_st_ = (expr);                        \
    ASSERT_TRUE(kp_st_.ok()) << kp_st_.ToString();             \
  } while (0)
#define EXPECT_OK(expr)                                        \
  do {                                                         \
    const ::kp::Status kp_st_ = (expr);                        \
    EXPECT_TRUE(kp_st_.ok()) << kp_st_.ToString();             \
  } while (0)

namespace kp::testing {

// A file or folder of the source tree (procedures/library, drivers/sim/presets
// ...), found through the source directory CMake compiled in, so tests run
// from any working directory and any build folder.
inline std::filesystem::path SourcePath(const std::string& relative) {
  return std::filesystem::path(KP_SOURCE_DIR) / relative;
}

// A fresh temporary directory, removed with everything in it at destruction.
class TempDir {
 public:
  TempDir();
  ~TempDir();
  std::filesystem::path path() const { return path_; }
  std::string File(const std::string& name) const { return (path_ / name).string(); }

 private:
  std::filesystem::path path_;
};

// Wraps another LineDevice and lets a test break the link on purpose:
// drop replies, garble them, or go silent for good after N lines.
class FaultyDevice final : public LineDevice {
 public:
  explicit FaultyDevice(LineDevice& inner) : inner_(inner) {}
  std::optional<std::string> HandleLine(std::string_view line) override;

  int lines_seen = 0;
  int silent_after = -1;      // >= 0: no reply at all once this many lines were seen
  int silent_until = -1;      // >= 0: ... and replies again after this many lines (a link that comes back)
  int drop_every = 0;         // > 0: drop every N-th reply
  int garble_every = 0;       // > 0: garble every N-th reply
  std::function<bool(std::string_view)> forward_when;  // lines still forwarded while silent

 private:
  LineDevice& inner_;
  int replies_ = 0;
};

}  // namespace kp::testing
