// LockstepClock: virtual time shared by several run loops, one thread each
// (the channels of a multi-channel bench run in one process). Time moves only
// when every participating thread is asleep on the clock (or waiting for a
// link another holds, BeginWait/EndWait); it then jumps to the earliest
// deadline and wakes the thread(s) sleeping until it. So each channel keeps
// its own sample period exactly, whatever the others do, and a 5-hour batch
// takes as long as its readings take to compute. A discrete-event scheduler
// in the form of a Clock: run loops need no change.
//
// Participants are counted: AddParticipants(n) before the threads start,
// Leave() from each when it ends (ParticipantScope). Without participants it
// behaves as a VirtualClock. Now() may be read from any thread.
#pragma once

#include <atomic>
#include <condition_variable>
#include <map>
#include <mutex>

#include "drivers/clock.h"

namespace kp {

class LockstepClock final : public Clock {
 public:
  explicit LockstepClock(Seconds start = Seconds(0)) : now_s_(start.count()) {}
  Seconds Now() const override { return Seconds(now_s_.load()); }
  void SleepUntil(Seconds deadline, const std::atomic<bool>* wake = nullptr) override;
  // Around a wait for something other than time (a shared link another
  // channel's thread holds, drivers/channel_link.h): time may move on meanwhile.
  void BeginWait();
  void EndWait();
  std::string WallTimeIso() const override { return Clock::WallTimeIso(); }

  void AddParticipants(int n);
  void Leave();
  int participants() const;

  // Leave() at the end of a participant's scope.
  class ParticipantScope {
   public:
    explicit ParticipantScope(LockstepClock* clock) : clock_(clock) {}
    ~ParticipantScope() {
      if (clock_ != nullptr) clock_->Leave();
    }
    ParticipantScope(const ParticipantScope&) = delete;
    ParticipantScope& operator=(const ParticipantScope&) = delete;

   private:
    LockstepClock* clock_;
  };

 private:
  struct Sleeper {
    std::condition_variable cv;
    bool due = false;
  };
  void MaybeAdvanceLocked();

  mutable std::mutex mu_;
  std::atomic<double> now_s_;
  int participants_ = 0;
  int waiting_ = 0;  // participants blocked on something else (BeginWait)
  std::multimap<double, Sleeper*> sleepers_;
};

}  // namespace kp
