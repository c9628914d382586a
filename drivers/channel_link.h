// Shared links: one instrument link used by several channels of a
// multi-channel instrument (an electronic load with eight inputs, a meter with
// a scanner), from several run loops at once.
//
// SharedLink owns the real Transport. Each channel talks through its own
// ChannelTransport (and so its own ScpiSession, drivers unchanged): every
// exchange holds the link's lock from its first line to its last reply
// (Transport::BeginExchange), and, for an instrument whose dialect selects
// channels with a command (`channel-select`, e.g. "INST:NSEL 3"), that line is
// written before every line the channel sends, inside the same hold. So a
// channel's select and its command are never split by another channel's
// access, even across a retry after a reconnect. Dialects that address
// channels inside the commands (`{ch}` in the command text) need no select line.
//
// Waiting for the lock tells the clock (Clock::BeginWait), so channels in
// virtual time (LockstepClock) do not stall each other. Thread-safe.
#pragma once

#include <atomic>
#include <memory>
#include <mutex>
#include <string>

#include "drivers/clock.h"
#include "drivers/transport.h"

namespace kp {

class SharedLink {
 public:
  SharedLink(std::unique_ptr<Transport> transport, Clock& clock) : transport_(std::move(transport)), clock_(clock) {}

  // A transport for one channel: `tag` names it in messages ("ch 3"),
  // `select_line` (empty: none) is written before each of its lines.
  std::unique_ptr<Transport> Channel(std::string tag, std::string select_line);

  // Exchanges made and failed at the link (timeouts, drops) since the last
  // success: a bench sees a lost instrument serving several channels here.
  bool failing() const { return failing_.load(); }
  long exchanges() const { return exchanges_.load(); }
  std::string Address() const { return transport_->Address(); }

 private:
  friend class ChannelTransport;
  std::unique_ptr<Transport> transport_;
  Clock& clock_;
  std::recursive_mutex mu_;
  std::atomic<bool> failing_{false};
  std::atomic<long> exchanges_{0};
};

class ChannelTransport final : public Transport {
 public:
  ChannelTransport(SharedLink& link, std::string tag, std::string select_line)
      : link_(link), tag_(std::move(tag)), select_(std::move(select_line)) {}
  Status WriteLine(std::string_view line) override;
  Result<std::string> ReadLine(Seconds timeout) override;
  void Flush() override;
  bool HasUnreadInput() override;
  Status Reconnect() override;
  std::string Address() const override { return link_.Address() + " " + tag_; }
  void BeginExchange() override;
  void EndExchange() override;

 private:
  Status Note(Status st);
  SharedLink& link_;
  std::string tag_, select_;
};

}  // namespace kp
