#include "drivers/status.h"

namespace kp {

const char* StatusCodeName(StatusCode code) {
  switch (code) {
    case StatusCode::kOk: return "OK";
    case StatusCode::kTimeout: return "Timeout";
    case StatusCode::kIo: return "I/O error";
    case StatusCode::kProtocol: return "Protocol error";
    case StatusCode::kInstrumentError: return "Instrument error";
    case StatusCode::kInvalidInput: return "Invalid input";
    case StatusCode::kLimitExceeded: return "Limit exceeded";
    case StatusCode::kAborted: return "Aborted";
    case StatusCode::kCorruption: return "Corruption";
    case StatusCode::kNotFound: return "Not found";
    case StatusCode::kUnavailable: return "Unavailable";
    case StatusCode::kInternal: return "Internal error";
  }
  return "Unknown";
}

std::string Status::ToString() const {
  if (ok()) return "OK";
  return std::string(StatusCodeName(code_)) + ": " + message_;
}

Status Status::WithContext(const std::string& context) const {
  if (ok()) return *this;
  return Status(code_, context + ": " + message_);
}

}  // namespace kp
