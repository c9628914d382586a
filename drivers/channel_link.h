// Shared links: one instrument link used by several channels of a
// multi-channel instrument (an electronic load with eight inputs, a meter with
// a scanner), from several run loops at once.
//
// SharedLink owns the real Transport. Each channel talks through its own
// ChannelTransport (and so its own ScpiSession; drivers unchanged). A line
// is written with the link held, preceded, for an instrument whose dialect
// selects channels with a command (`channel-select`, e.g. "INST:NSEL 3"), by
// that select line: a channel's select and its command are never split by
// another channel's access, whatever the session retries. A line that asks
// something (holds '?') keeps the link held until its reply has been read (or
// failed), so no other channel's line comes between a query and its reply.
// Dialects that address channels inside the commands (`{ch}` in the command
// text, a SCPI channel list) need no select line.
//
// The link is handed over in turn (a ticket lock): the channel that waited
// longest gets it next. A channel waiting for the link counts as waiting on a
// LockstepClock (BeginWait) until the link is handed to it, so channels in
// virtual time neither stall each other nor let time run while a channel
// that holds the link (or was just handed it) is still working. Each ChannelTransport is
// used by one thread at a time (as every Transport); the link is shared.
#pragma once

#include <atomic>
#include <condition_variable>
#include <cstdint>
#include <memory>
#include <mutex>
#include <string>

#include "drivers/clock.h"
#include "drivers/transport.h"

namespace kp {

class LockstepClock;

class SharedLink {
 public:
  // `clock`: when it is a LockstepClock, waits for the link are reported to it.
  SharedLink(std::unique_ptr<Transport> transport, Clock& clock);

  // A transport for one channel: `tag` names it in messages ("ch 3"),
  // `select_line` (empty: none) is written before each of its lines.
  std::unique_ptr<Transport> Channel(std::string tag, std::string select_line);

  // The link's last reply attempt failed (a timeout or drop, not cleared by
  // a later reply): a bench sees a lost instrument serving several channels here.
  bool failing() const { return failing_.load(); }
  // Lines written (select lines not counted).
  long lines() const { return lines_.load(); }
  std::string Address() const { return transport_->Address(); }

 private:
  friend class ChannelTransport;
  void Acquire();
  void Unlock();
  std::unique_ptr<Transport> transport_;
  LockstepClock* lockstep_ = nullptr;
  std::mutex mu_;  // guards the tickets
  std::condition_variable turn_;
  uint64_t next_ticket_ = 0, serving_ = 0;
  std::atomic<bool> failing_{false};
  std::atomic<long> lines_{0};
};

class ChannelTransport final : public Transport {
 public:
  ChannelTransport(SharedLink& link, std::string tag, std::string select_line)
      : link_(link), tag_(std::move(tag)), select_(std::move(select_line)) {}
  ~ChannelTransport() override;
  Status WriteLine(std::string_view line) override;
  Result<std::string> ReadLine(Seconds timeout) override;
  void Flush() override;
  bool HasUnreadInput() override;
  Status Reconnect() override;
  std::string Address() const override { return tag_.empty() ? link_.Address() : link_.Address() + " " + tag_; }

 private:
  void Release();
  SharedLink& link_;
  std::string tag_, select_;
  bool held_ = false;  // this channel holds the link, awaiting a reply
};

}  // namespace kp
