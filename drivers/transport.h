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
  // Around one whole exchange of the session (a command with its *OPC?, a
  // query with its reply, the retries and resyncs between): a link shared by
  // several channels (drivers/channel_link.h) holds it for that long, so no
  // other channel's lines come in between. Nested calls nest. Default: nothing.
  virtual void BeginExchange() {}
  virtual void EndExchange() {}
};

// Holds a transport's exchange for a scope.
class ExchangeScope {
 public:
  explicit ExchangeScope(Transport& t) : t_(t) { t_.BeginExchange(); }
  ~ExchangeScope() { t_.EndExchange(); }
  ExchangeScope(const ExchangeScope&) = delete;
  ExchangeScope& operator=(const ExchangeScope&) = delete;

 private:
  Transport& t_;
};

// Something that answers SCPI lines in-process: the simulated instruments.
class LineDevice {
 public:
  virtual ~LineDevice() = default;
  // Handles one command line; returns the reply for a query, nothing otherwise.
  virtual std::optional<std::string> HandleLine(std::string_view line) = 0;
};

}  // namespace kp
