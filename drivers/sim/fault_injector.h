// FaultInjector: wraps a simulated instrument (a LineDevice) and breaks its
// replies on purpose, as a flaky cable or instrument would. Used by
// `kneepoint sim` and the fault tests. Faults apply to queries (lines with a
// '?'); every fault counts queries per instrument, so with the same options
// and the same run the same exchange is hit every time.
//
// Thread-safe (one mutex); the server may call it from its own thread.
#pragma once

#include <map>
#include <mutex>
#include <optional>
#include <string>
#include <string_view>
#include <deque>

#include "drivers/clock.h"
#include "drivers/transport.h"

namespace kp::sim {

struct FaultOptions {
  int drop_every = 0;        // > 0: every N-th query gets no reply
  int corrupt_every = 0;     // > 0: every N-th reply is garbled
  int delay_every = 0;       // > 0: every N-th reply is held back delay_s (wall time)
  double delay_s = 0.0;
  int disconnect_at = 0;     // > 0: the N-th query is handled, then the link is closed (once);
                             // a pseudo-terminal cannot be closed, so there it acts as a dropped reply
  int error_every = 0;       // > 0: every N-th query answers 9.91E37 (no reading) and queues an SCPI error
  int stick_at = 0;          // > 0: from the N-th query on, measurement replies repeat the value they had then
  // > 0: the N-th setting (a command with a numeric argument, such as
  // "CURR 1.5") is refused as an instrument refuses a value: not applied, and
  // -222,"Data out of range" queued for SYSTem:ERRor?. Counted per instrument.
  int refuse_setting_at = 0;
  bool any() const {
    return drop_every > 0 || corrupt_every > 0 || delay_every > 0 || disconnect_at > 0 || error_every > 0 || stick_at > 0 ||
           refuse_setting_at > 0;
  }
};

// What the server should do with one line.
struct FaultedReply {
  std::optional<std::string> reply;  // nothing: send nothing
  Seconds delay{0.0};                // wall time to wait before sending
  bool disconnect = false;           // close the link after this line
  std::string fault;                 // the fault applied, empty if none
};

class FaultInjector final : public LineDevice {
 public:
  // `inner` must outlive the injector.
  FaultInjector(LineDevice& inner, FaultOptions options) : inner_(inner), options_(options) {}

  FaultedReply Respond(std::string_view line);
  // In-process use: delay and disconnect cannot be expressed and act as a dropped reply.
  std::optional<std::string> HandleLine(std::string_view line) override;

  int faults_injected() const;

 private:
  LineDevice& inner_;
  FaultOptions options_;
  mutable std::mutex mu_;
  int queries_ = 0;
  int settings_ = 0;
  int faults_ = 0;
  bool disconnected_ = false;
  std::deque<std::string> errors_;              // injected SYSTem:ERRor? entries
  std::map<std::string, std::string> stuck_;    // measurement header -> frozen reply
};

}  // namespace kp::sim
