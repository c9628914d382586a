#include "drivers/inproc_transport.h"

namespace kp {

Status InProcTransport::WriteLine(std::string_view line) {
  if (auto reply = device_.HandleLine(line)) pending_.push_back(std::move(*reply));
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
