#include "drivers/lockstep_clock.h"

#include <chrono>

namespace kp {

void LockstepClock::AddParticipants(int n) {
  std::lock_guard<std::mutex> lk(mu_);
  participants_ += n;
}

int LockstepClock::participants() const {
  std::lock_guard<std::mutex> lk(mu_);
  return participants_;
}

void LockstepClock::Leave() {
  std::lock_guard<std::mutex> lk(mu_);
  if (participants_ > 0) --participants_;
  MaybeAdvanceLocked();
}

void LockstepClock::BeginWait() {
  std::lock_guard<std::mutex> lk(mu_);
  ++waiting_;
  MaybeAdvanceLocked();
}

void LockstepClock::EndWait() {
  std::lock_guard<std::mutex> lk(mu_);
  if (waiting_ > 0) --waiting_;
}

void LockstepClock::MaybeAdvanceLocked() {
  if (sleepers_.empty()) return;
  if (static_cast<int>(sleepers_.size()) + waiting_ < participants_) return;  // somebody is still working
  double next = sleepers_.begin()->first;
  if (next > now_s_.load()) now_s_.store(next);
  // Wake everyone due now (several channels may share a deadline).
  for (auto it = sleepers_.begin(); it != sleepers_.end() && it->first <= now_s_.load(); it = sleepers_.erase(it)) {
    it->second->due = true;
    it->second->cv.notify_one();
  }
}

void LockstepClock::SleepUntil(Seconds deadline, const std::atomic<bool>* wake) {
  std::unique_lock<std::mutex> lk(mu_);
  const double d = deadline.count();
  if (participants_ == 0) {  // nobody to keep in step with: a plain virtual clock
    if (d > now_s_.load()) now_s_.store(d);
    return;
  }
  if (d <= now_s_.load()) return;
  Sleeper me;
  auto pos = sleepers_.emplace(d, &me);
  MaybeAdvanceLocked();
  while (!me.due) {
    if (wake != nullptr && wake->load()) {
      // Woken early (a stop request): leave the queue, time stays where it is.
      for (auto it = sleepers_.begin(); it != sleepers_.end(); ++it)
        if (it->second == &me) {
          sleepers_.erase(it);
          break;
        }
      return;
    }
    // The wake flag is set by threads that know nothing of this clock: look at it every few ms.
    me.cv.wait_for(lk, std::chrono::milliseconds(wake != nullptr ? 5 : 50));
    if (!me.due) MaybeAdvanceLocked();
  }
  (void)pos;
}

}  // namespace kp
