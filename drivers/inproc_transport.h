// In-process transport: hands each line straight to a LineDevice (the
// simulator) and queues its reply. Used by the demo and most tests, in virtual
// time. A reply holding line terminators ('\n') is queued as that many lines,
// as a stream would deliver them (an instrument that answers twice). A missing reply waits out the timeout on the injected Clock, exactly as
// a silent instrument would.
#pragma once

#include <deque>
#include <string>

#include "drivers/transport.h"

namespace kp {

class InProcTransport final : public Transport {
 public:
  // `device` and `clock` must outlive the transport.
  InProcTransport(LineDevice& device, Clock& clock, std::string address = "inproc:sim")
      : device_(device), clock_(clock), address_(std::move(address)) {}

  Status WriteLine(std::string_view line) override;
  Result<std::string> ReadLine(Seconds timeout) override;
  void Flush() override { pending_.clear(); }
  bool HasUnreadInput() override { return !pending_.empty(); }
  std::string Address() const override { return address_; }

 private:
  LineDevice& device_;
  Clock& clock_;
  std::string address_;
  std::deque<std::string> pending_;
};

}  // namespace kp
