// Status and Result<T>: errors as values (no exceptions across module boundaries).
//
// A Status is cheap to copy: a kind and a human-readable message that says what
// happened and where (file:line:col, instrument address, SQL statement...).
// Result<T> holds either a value or a non-OK Status. Both are [[nodiscard]].
#pragma once

#include <cassert>
#include <optional>
#include <string>
#include <utility>
#include <variant>

namespace kp {

enum class StatusCode {
  kOk = 0,
  kTimeout,          // an instrument or transport did not answer in time
  kIo,               // operating-system I/O failure (disk, port, socket)
  kProtocol,         // malformed or unexpected reply
  kInstrumentError,  // the instrument reported an error (SYSTem:ERRor?)
  kInvalidInput,     // bad user input: procedure, rig file, option
  kLimitExceeded,    // a safety or rig limit was hit
  kAborted,          // stopped on request (operator, signal)
  kCorruption,       // stored data is inconsistent
  kNotFound,         // asked for something that does not exist
  kUnavailable,      // resource busy or locked by another process
  kInternal,         // programming error surfaced as a value
};

const char* StatusCodeName(StatusCode code);

class [[nodiscard]] Status {
 public:
  Status() = default;
  Status(StatusCode code, std::string message) : code_(code), message_(std::move(message)) {}

  static Status Ok() { return Status(); }

  bool ok() const { return code_ == StatusCode::kOk; }
  StatusCode code() const { return code_; }
  const std::string& message() const { return message_; }
  // "Timeout: no reply to MEAS:VOLT? within 2.0 s"
  std::string ToString() const;

  // Returns a copy with `context` prepended ("opening rig.toml: ...").
  Status WithContext(const std::string& context) const;

 private:
  StatusCode code_ = StatusCode::kOk;
  std::string message_;
};

inline Status TimeoutError(std::string m) { return {StatusCode::kTimeout, std::move(m)}; }
inline Status IoError(std::string m) { return {StatusCode::kIo, std::move(m)}; }
inline Status ProtocolError(std::string m) { return {StatusCode::kProtocol, std::move(m)}; }
inline Status InstrumentError(std::string m) { return {StatusCode::kInstrumentError, std::move(m)}; }
inline Status InvalidInput(std::string m) { return {StatusCode::kInvalidInput, std::move(m)}; }
inline Status LimitExceeded(std::string m) { return {StatusCode::kLimitExceeded, std::move(m)}; }
inline Status AbortedError(std::string m) { return {StatusCode::kAborted, std::move(m)}; }
inline Status CorruptionError(std::string m) { return {StatusCode::kCorruption, std::move(m)}; }
inline Status NotFound(std::string m) { return {StatusCode::kNotFound, std::move(m)}; }
inline Status Unavailable(std::string m) { return {StatusCode::kUnavailable, std::move(m)}; }
inline Status InternalError(std::string m) { return {StatusCode::kInternal, std::move(m)}; }

template <typename T>
class [[nodiscard]] Result {
 public:
  Result(T value) : v_(std::move(value)) {}  // NOLINT(google-explicit-constructor)
  Result(Status status) : v_(std::move(status)) {  // NOLINT(google-explicit-constructor)
    assert(!std::get<Status>(v_).ok() && "Result built from an OK status");
  }

  bool ok() const { return std::holds_alternative<T>(v_); }
  Status status() const { return ok() ? Status::Ok() : std::get<Status>(v_); }

  T& value() & { assert(ok()); return std::get<T>(v_); }
  const T& value() const& { assert(ok()); return std::get<T>(v_); }
  T&& value() && { assert(ok()); return std::get<T>(std::move(v_)); }
  T& operator*() & { return value(); }
  const T& operator*() const& { return value(); }
  T* operator->() { return &value(); }
  const T* operator->() const { return &value(); }

 private:
  std::variant<T, Status> v_;
};

}  // namespace kp

#define KP_CONCAT_INNER(a, b) a##b
#define KP_CONCAT(a, b) KP_CONCAT_INNER(a, b)

// Returns the Status from the enclosing function when `expr` is not OK.
#define KP_RETURN_IF_ERROR(expr)                  \
  do {                                            \
    ::kp::Status kp_status_ = (expr);             \
    if (!kp_status_.ok()) return kp_status_;      \
  } while (0)

// `KP_ASSIGN_OR_RETURN(auto x, MakeX());` declares x from a Result or returns its Status.
#define KP_ASSIGN_OR_RETURN(lhs, expr) KP_ASSIGN_OR_RETURN_IMPL(KP_CONCAT(kp_result_, __LINE__), lhs, expr)
#define KP_ASSIGN_OR_RETURN_IMPL(tmp, lhs, expr) \
  auto tmp = (expr);                             \
  if (!tmp.ok()) return tmp.status();            \
  lhs = std::move(tmp).value()
