#include "drivers/channel_link.h"

#include "drivers/lockstep_clock.h"

namespace kp {

SharedLink::SharedLink(std::unique_ptr<Transport> transport, Clock& clock)
    : transport_(std::move(transport)), lockstep_(dynamic_cast<LockstepClock*>(&clock)) {}

std::unique_ptr<Transport> SharedLink::Channel(std::string tag, std::string select_line) {
  return std::make_unique<ChannelTransport>(*this, std::move(tag), std::move(select_line));
}

void SharedLink::Acquire() {
  std::unique_lock<std::mutex> lk(mu_);
  const uint64_t mine = next_ticket_++;
  if (mine == serving_) return;  // free
  if (lockstep_ != nullptr) lockstep_->BeginWait();
  turn_.wait(lk, [&] { return serving_ == mine; });
  // Counted as working again by Unlock, when the link was handed over.
}

void SharedLink::Unlock() {
  std::lock_guard<std::mutex> lk(mu_);
  ++serving_;
  if (serving_ < next_ticket_) {
    // Handed to the next waiter: it is working from now on, before it even wakes.
    if (lockstep_ != nullptr) lockstep_->EndWait();
    turn_.notify_all();
  }
}

ChannelTransport::~ChannelTransport() { Release(); }

void ChannelTransport::Release() {
  if (!held_) return;
  held_ = false;
  link_.Unlock();
}

namespace {
bool IsLinkFault(const Status& st) { return st.code() == StatusCode::kTimeout || st.code() == StatusCode::kIo; }
}  // namespace

Status ChannelTransport::WriteLine(std::string_view line) {
  if (!held_) {
    link_.Acquire();
    held_ = true;
  }
  ++link_.lines_;
  Status st = Status::Ok();
  if (!select_.empty()) st = link_.transport_->WriteLine(select_);
  if (st.ok()) st = link_.transport_->WriteLine(line);
  if (IsLinkFault(st)) link_.failing_.store(true);  // only a reply clears it: a write into a dead peer may still succeed
  // A command has no reply: the link is free again. A query keeps it until its reply.
  if (!st.ok() || line.find('?') == std::string_view::npos) Release();
  return st;
}

Result<std::string> ChannelTransport::ReadLine(Seconds timeout) {
  const bool was_held = held_;
  if (!held_) {
    link_.Acquire();
    held_ = true;
  }
  Result<std::string> r = link_.transport_->ReadLine(timeout);
  if (r.ok()) link_.failing_.store(false);
  else if (IsLinkFault(r.status())) link_.failing_.store(true);
  // The reply read (or given up): free, unless more lines of it are waiting
  // (a compound query's extra lines are read by the same exchange).
  if (!was_held || !r.ok() || !link_.transport_->HasUnreadInput()) Release();
  return r;
}

void ChannelTransport::Flush() {
  if (held_) {
    link_.transport_->Flush();
    return;
  }
  link_.Acquire();  // a wait the lockstep clock must know of
  link_.transport_->Flush();
  link_.Unlock();
}

bool ChannelTransport::HasUnreadInput() {
  if (held_) return link_.transport_->HasUnreadInput();
  link_.Acquire();
  const bool unread = link_.transport_->HasUnreadInput();
  link_.Unlock();
  return unread;
}

Status ChannelTransport::Reconnect() {
  if (!held_) link_.Acquire();
  held_ = true;
  Status st = link_.transport_->Reconnect();
  Release();
  return st;
}

}  // namespace kp
