// Transport: the only door to instrument I/O. Line-oriented: the SCPI layer
// writes one command line and reads one reply line. Implementations add and
// strip the line terminator themselves.
//
// Ownership: a Transport is owned by the ScpiSession that uses it. Not
// thread-safe; one session talks through one transport at a time.
#pragma once

#include <memory>
#include <optional>
#include <string>
#include <string_view>

#include "drivers/clock.h"
#include "drivers/status.h"

namespace kp {

class Transport {
 public:
  virtual ~Transport() = default;
  // Sends `line` followed by the terminator.
  virtual Status WriteLine(std::string_view line) = 0;
  // Reads one line (terminator stripped) or fails with kTimeout after `timeout`.
  virtual Result<std::string> ReadLine(Seconds timeout) = 0;
  // Drops any unread input (after a timeout, before a retry).
  virtual void Flush() {}
  // True when input the session has not asked for is waiting (a reply that
  // came late or twice, or part of one), without blocking. Default: unknown, false.
  virtual bool HasUnreadInput() { return false; }
  // Closes and reopens the link after it dropped. Default: nothing to do.
  virtual Status Reconnect() { return Status::Ok(); }
  // Address as the user wrote it, for messages and the trace ("tcp:127.0.0.1:5025").
  virtual std::string Address() const = 0;
};

// Something that answers SCPI lines in-process: the simulated instruments.
class LineDevice {
 public:
  virtual ~LineDevice() = default;
  // Handles one command line; returns the reply for a query, nothing otherwise.
  virtual std::optional<std::string> HandleLine(std::string_view line) = 0;
};

}  // namespace kp
