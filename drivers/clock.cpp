#include "drivers/clock.h"

#include <algorithm>
#include <ctime>
#include <thread>

namespace kp {

std::string Clock::WallTimeIso() const {
  std::time_t t = std::chrono::system_clock::to_time_t(std::chrono::system_clock::now());
  std::tm tm{};
  gmtime_r(&t, &tm);
  char buf[32];
  std::strftime(buf, sizeof buf, "%Y-%m-%dT%H:%M:%SZ", &tm);
  return buf;
}

SteadyClock::SteadyClock(double speed) : speed_(speed > 0 ? speed : 1.0), origin_(std::chrono::steady_clock::now()) {}

Seconds SteadyClock::Now() const {
  return Seconds(std::chrono::duration<double>(std::chrono::steady_clock::now() - origin_).count() * speed_);
}

void SteadyClock::SleepUntil(Seconds deadline, const std::atomic<bool>* wake) {
  for (;;) {
    if (wake != nullptr && wake->load()) return;
    Seconds left = deadline - Now();
    if (left <= Seconds(0)) return;
    double real_left = left.count() / speed_;
    std::this_thread::sleep_for(std::chrono::duration<double>(std::min(real_left, 0.1)));
  }
}

void VirtualClock::SleepUntil(Seconds deadline, const std::atomic<bool>* /*wake*/) {
  if (deadline.count() > now_s_.load()) now_s_.store(deadline.count());
}

std::string VirtualClock::WallTimeIso() const {
  // Virtual runs still record when they were made.
  return Clock::WallTimeIso();
}

}  // namespace kp
