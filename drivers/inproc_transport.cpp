#include "drivers/inproc_transport.h"

namespace kp {

Status InProcTransport::WriteLine(std::string_view line) {
  std::optional<std::string> reply = device_.HandleLine(line);
  if (!reply) return Status::Ok();
  // One line per terminator; a reply without one is one line (the simulator's).
  std::string_view rest = *reply;
  for (size_t nl = rest.find('\n'); nl != std::string_view::npos; nl = rest.find('\n')) {
    pending_.emplace_back(rest.substr(0, nl));
    rest.remove_prefix(nl + 1);
  }
  if (!rest.empty() || reply->empty()) pending_.emplace_back(rest);
  return Status::Ok();
}

Result<std::string> InProcTransport::ReadLine(Seconds timeout) {
  if (pending_.empty()) {
    clock_.SleepUntil(clock_.Now() + timeout);
    return TimeoutError("no reply from " + address_ + " within " + std::to_string(timeout.count()) + " s");
  }
  std::string line = std::move(pending_.front());
  pending_.pop_front();
  return line;
}

}  // namespace kp
