// ScpiSession: one conversation with one instrument over a Transport.
//
// Framing is the transport's; the session adds per-query timeouts, bounded
// retries (with a reconnect when the link dropped), the IEEE 488.2 common
// commands, draining of the SYSTem:ERRor? queue, and an optional trace hook
// that sees every line in both directions. Not thread-safe.
#pragma once

#include <functional>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include "drivers/clock.h"
#include "drivers/scpi_syntax.h"
#include "drivers/transport.h"

namespace kp {

struct ScpiOptions {
  Seconds timeout{2.0};      // per query
  int retries = 2;           // extra attempts for a query that timed out or dropped
  bool error_queue = true;   // the instrument implements SYSTem:ERRor?
  int max_error_drain = 20;  // stop draining a queue that never empties
  // Follow every command with *OPC? and wait for its "1": the instrument has
  // then taken the setting before the run goes on, and a command lost on a
  // dropped link is sent again after the reconnect.
  bool confirm_writes = false;
  // After a query timed out, wait this long for its late reply and discard it
  // before retrying, so a slow answer cannot pair with the next query (0: no wait).
  Seconds late_reply{0.0};
  // One command, one complete reply: input nobody asked for (found before a
  // line is sent, or after a reply was read) resynchronises the link with
  // *CLS and *OPC? (everything before the "1" is discarded) and the exchange
  // is repeated; so does a timeout when late_reply > 0 (a late reply may
  // still come); a stray line is never taken as a reply.
  bool strict_framing = true;
  // The instrument's error-queue query (the dialect's `error-query`).
  std::string error_query = "SYST:ERR?";
  // Numeric replies may end in a unit ("12.003 V", "1.500A", "25.1 °C"): the
  // trailing letters, degree sign and blanks are dropped before the number
  // is read (the dialect's `strip-reply-units`).
  bool strip_units = false;
  // After every command that is not a query (nor *CLS), drain the error
  // queue; anything queued fails the command with kInstrumentError naming it
  // ("... refused 'CURR 40': -222,\"Data out of range\"") (the dialect's
  // `check-settings`).
  bool check_settings = false;
};

// "12.003 V" -> "12.003": drops trailing letters, blanks and a degree or ohm
// sign when a digit or '.' is left at the end; anything else is returned as given.
std::string_view StripReplyUnit(std::string_view reply);

// Direction of a traced line: '>' sent, '<' received, '!' a failure note.
using ScpiTraceHook = std::function<void(Seconds at, char direction, const std::string& address, std::string_view text)>;

class ScpiSession {
 public:
  ScpiSession(std::unique_ptr<Transport> transport, Clock& clock, ScpiOptions options = {});

  void SetTrace(ScpiTraceHook hook) { trace_ = std::move(hook); }
  const std::string& address() const { return address_; }
  // Switches the check-settings behaviour (ScpiOptions::check_settings).
  void SetCheckSettings(bool on) { options_.check_settings = on; }
  // The clock the session was given (settle times wait on it).
  Clock& clock() { return clock_; }
  // Number of retried exchanges so far (for the run log).
  int retry_count() const { return retry_count_; }
  // Number of resynchronisations after a late, duplicate or unasked reply.
  int resync_count() const { return resync_count_; }

  // Sends a command that has no reply.
  Status Write(std::string_view command);
  // Sends a query and returns its reply line, retrying on timeout / drop.
  Result<std::string> Query(std::string_view query);
  // Query whose reply is one SCPI number. Overflow (9.9E37) and NaN come back
  // as a ScpiNumber of that kind, not as an error: the caller decides.
  Result<ScpiNumber> QueryNumber(std::string_view query);

  // IEEE 488.2 common commands.
  Result<std::string> Identify() { return Query("*IDN?"); }
  Status Reset() { return Write("*RST"); }
  Status Clear() { return Write("*CLS"); }
  // *OPC? returns "1" once pending operations are done.
  Status WaitComplete();

  // Drains SYSTem:ERRor? until "0,..." and returns kInstrumentError carrying
  // every reported entry ("-113,\"Undefined header\"") when any were queued.
  Status DrainErrors();

 private:
  Status Send(std::string_view line);
  Status WriteOnce(std::string_view command);
  // Before a retry: drops unread input and, after a timeout, a late reply.
  void Resync(const Status& last);
  // Runs `once` up to 1 + retries times. Before each retry: counts and traces
  // it, resynchronises the line and reconnects after a link error. Stops at
  // the first success or at an error that is not retryable (timeout and link
  // errors are; protocol errors too when `retry_protocol`). A final error
  // carries the address and `what`.
  Status Retrying(std::string_view what, bool retry_protocol, const std::function<Status()>& once);
  void Trace(char direction, std::string_view text);
  // Strict framing: *CLS, *OPC?, lines read and dropped until its "1".
  Status ResyncWithMarker(std::string_view why);
  // Strict framing: before sending, input nobody asked for forces a resync.
  Status CheckQuiet(std::string_view before);

  std::unique_ptr<Transport> transport_;
  Clock& clock_;
  ScpiOptions options_;
  std::string address_;
  ScpiTraceHook trace_;
  int retry_count_ = 0;
  int resync_count_ = 0;
};

}  // namespace kp
