#include "drivers/channel_link.h"

namespace kp {

std::unique_ptr<Transport> SharedLink::Channel(std::string tag, std::string select_line) {
  return std::make_unique<ChannelTransport>(*this, std::move(tag), std::move(select_line));
}

void ChannelTransport::BeginExchange() {
  if (link_.mu_.try_lock()) return;
  link_.clock_.BeginWait();
  link_.mu_.lock();
  link_.clock_.EndWait();
}

void ChannelTransport::EndExchange() { link_.mu_.unlock(); }

Status ChannelTransport::Note(Status st) {
  const bool link_fault = st.code() == StatusCode::kTimeout || st.code() == StatusCode::kIo;
  if (link_fault) link_.failing_.store(true);
  else if (st.ok()) link_.failing_.store(false);
  return st;
}

Status ChannelTransport::WriteLine(std::string_view line) {
  std::lock_guard<std::recursive_mutex> hold(link_.mu_);
  ++link_.exchanges_;
  if (!select_.empty()) {
    Status st = link_.transport_->WriteLine(select_);
    if (!st.ok()) return Note(st);
  }
  return Note(link_.transport_->WriteLine(line));
}

Result<std::string> ChannelTransport::ReadLine(Seconds timeout) {
  std::lock_guard<std::recursive_mutex> hold(link_.mu_);
  Result<std::string> r = link_.transport_->ReadLine(timeout);
  (void)Note(r.ok() ? Status::Ok() : r.status());
  return r;
}

void ChannelTransport::Flush() {
  std::lock_guard<std::recursive_mutex> hold(link_.mu_);
  link_.transport_->Flush();
}

bool ChannelTransport::HasUnreadInput() {
  std::lock_guard<std::recursive_mutex> hold(link_.mu_);
  return link_.transport_->HasUnreadInput();
}

Status ChannelTransport::Reconnect() {
  std::lock_guard<std::recursive_mutex> hold(link_.mu_);
  return Note(link_.transport_->Reconnect());
}

}  // namespace kp
