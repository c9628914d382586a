#include "tests/support/test_support.h"

#include <cstdlib>
#include <random>

namespace kp::testing {
namespace {

// The tests never read the configuration file of whoever runs them (README
// "Configuration"): a test that wants one names it in KNEEPOINT_CONFIG.
const bool kNoUserConfig = [] {
  setenv("KNEEPOINT_CONFIG", "/nonexistent/kneepoint-tests/config.toml", 1);
  return true;
}();

}  // namespace

TempDir::TempDir() {
  std::random_device rd;
  path_ = std::filesystem::temp_directory_path() / ("kneepoint-test-" + std::to_string(rd()) + std::to_string(rd()));
  std::filesystem::create_directories(path_);
}

TempDir::~TempDir() {
  std::error_code ec;
  std::filesystem::remove_all(path_, ec);
}

std::optional<std::string> FaultyDevice::HandleLine(std::string_view line) {
  ++lines_seen;
  if (silent_after >= 0 && lines_seen > silent_after && (silent_until < 0 || lines_seen <= silent_until)) {
    if (forward_when && forward_when(line)) (void)inner_.HandleLine(line);
    return std::nullopt;
  }
  auto reply = inner_.HandleLine(line);
  if (!reply) return reply;
  ++replies_;
  if (drop_every > 0 && replies_ % drop_every == 0) return std::nullopt;
  if (garble_every > 0 && replies_ % garble_every == 0) return std::string("#%&garbage");
  return reply;
}

}  // namespace kp::testing
