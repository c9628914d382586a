// Clock: the only door to time. Everything that waits or timestamps takes a
// Clock& so the whole rig can run in virtual time on the simulator.
//
// Times are seconds since the clock's own epoch (a steady, monotonic origin),
// held as std::chrono::duration<double>. Wall-clock dates for the database come
// from WallTimeIso(), also behind this interface.
#pragma once

#include <atomic>
#include <chrono>
#include <memory>
#include <string>

namespace kp {

using Seconds = std::chrono::duration<double>;

class Clock {
 public:
  virtual ~Clock() = default;
  // Monotonic time since this clock's epoch.
  virtual Seconds Now() const = 0;
  // Blocks until Now() >= deadline, or returns early once `*wake` becomes true
  // (checked at least every 100 ms of real time). A virtual clock jumps.
  virtual void SleepUntil(Seconds deadline, const std::atomic<bool>* wake = nullptr) = 0;
  // Calendar time for records, ISO 8601 UTC ("2026-12-01T21:44:15Z").
  virtual std::string WallTimeIso() const;
};

// Real steady clock, optionally running `speed` times faster than the wall
// (speed 1 on hardware; `--speed K` against the simulator).
class SteadyClock final : public Clock {
 public:
  explicit SteadyClock(double speed = 1.0);
  Seconds Now() const override;
  void SleepUntil(Seconds deadline, const std::atomic<bool>* wake = nullptr) override;

 private:
  double speed_;
  std::chrono::steady_clock::time_point origin_;
};

// Virtual clock: Now() moves only when somebody sleeps or calls Advance().
// One run loop drives it; Now() may be read from other threads (a simulator
// server serving the same bench), so the time is held atomically.
class VirtualClock final : public Clock {
 public:
  explicit VirtualClock(Seconds start = Seconds(0)) : now_s_(start.count()) {}
  Seconds Now() const override { return Seconds(now_s_.load()); }
  void SleepUntil(Seconds deadline, const std::atomic<bool>* wake = nullptr) override;
  void Advance(Seconds by) { now_s_.store(now_s_.load() + by.count()); }
  std::string WallTimeIso() const override;

 private:
  std::atomic<double> now_s_;
};

}  // namespace kp
