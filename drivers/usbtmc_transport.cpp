#include "drivers/usbtmc_transport.h"

#include <algorithm>
#include <cerrno>
#include <chrono>
#include <cstdint>
#include <cstring>

#include <fcntl.h>
#include <linux/usb/tmc.h>
#include <poll.h>
#include <sys/ioctl.h>
#include <sys/stat.h>
#include <unistd.h>

#include <fmt/format.h>

namespace kp {
namespace {

constexpr size_t kChunk = 65536;
constexpr size_t kMaxReply = 1 << 20;

class UsbtmcTransport final : public Transport {
 public:
  UsbtmcTransport(kp::Address address, UsbtmcOptions options) : addr_(std::move(address)), options_(std::move(options)) {}
  ~UsbtmcTransport() override { Close(); }

  Status Open() {
    kp::Address a = addr_;
    if (a.path.empty()) KP_RETURN_IF_ERROR(ResolveUsbtmc(a, options_.sysfs));
    path_ = a.path;
    Result<int> fd = options_.open ? options_.open(path_) : OpenPath(path_);
    if (!fd.ok()) return fd.status();
    fd_ = *fd;
    struct stat st {};
    driver_ = ::fstat(fd_, &st) == 0 && S_ISCHR(st.st_mode);
    timeout_ms_ = 0;
    return Status::Ok();
  }

  Status WriteLine(std::string_view line) override {
    if (fd_ < 0) return IoError(fmt::format("{}: link is closed", addr_.text));
    std::string out(line);
    out += addr_.eol;
    for (;;) {
      ssize_t n = ::write(fd_, out.data(), out.size());
      if (n == static_cast<ssize_t>(out.size())) return Status::Ok();
      if (n < 0 && errno == EINTR) continue;
      if (n < 0 && errno == ETIMEDOUT) return TimeoutError(fmt::format("{}: the instrument did not take the message", addr_.text));
      if (n >= 0) return IoError(fmt::format("{}: short write ({} of {} bytes)", addr_.text, n, out.size()));
      Status st = IoError(fmt::format("{}: write: {}", addr_.text, std::strerror(errno)));
      Close();
      return st;
    }
  }

  Result<std::string> ReadLine(Seconds timeout) override {
    if (fd_ < 0) return IoError(fmt::format("{}: link is closed", addr_.text));
    int ms = std::max(1, static_cast<int>(timeout.count() * 1000.0));
    if (driver_) {
      if (ms != timeout_ms_) {
        auto t = static_cast<uint32_t>(ms);
        if (::ioctl(fd_, USBTMC_IOCTL_SET_TIMEOUT, &t) == 0) timeout_ms_ = ms;
      }
    } else {
      pollfd p{fd_, POLLIN, 0};
      int r;
      do r = ::poll(&p, 1, ms);
      while (r < 0 && errno == EINTR);
      if (r == 0) return TimeoutError(fmt::format("no reply from {} within {:.3g} s", addr_.text, timeout.count()));
      if (r < 0) return IoError(fmt::format("{}: poll: {}", addr_.text, std::strerror(errno)));
    }
    std::string reply;
    for (;;) {
      char chunk[kChunk];
      ssize_t n = ::read(fd_, chunk, sizeof chunk);
      if (n < 0 && errno == EINTR) continue;
      if (n < 0 && errno == ETIMEDOUT)
        return TimeoutError(fmt::format("no reply from {} within {:.3g} s", addr_.text, timeout.count()));
      if (n < 0 || (n == 0 && reply.empty())) {
        Status st = IoError(fmt::format("{}: {}", addr_.text, n == 0 ? std::string("device closed") : "read: " + std::string(std::strerror(errno))));
        Close();
        return st;
      }
      reply.append(chunk, static_cast<size_t>(n));
      // A reply that fills the buffer continues in the next read (the driver
      // hands out the rest of the same message); a fake peer sends one.
      if (!driver_ || static_cast<size_t>(n) < sizeof chunk) break;
      if (reply.size() > kMaxReply) return ProtocolError(fmt::format("{}: reply longer than 1 MiB", addr_.text));
    }
    if (reply.ends_with(addr_.eol)) reply.resize(reply.size() - addr_.eol.size());
    while (!reply.empty() && (reply.back() == '\n' || reply.back() == '\r')) reply.pop_back();
    return reply;
  }

  void Flush() override {
    if (fd_ < 0) return;
    if (driver_) {
      (void)::ioctl(fd_, USBTMC_IOCTL_CLEAR);
      return;
    }
    char chunk[kChunk];
    for (int i = 0; i < 64; ++i) {
      pollfd p{fd_, POLLIN, 0};
      if (::poll(&p, 1, 0) <= 0 || !(p.revents & POLLIN)) return;
      if (::read(fd_, chunk, sizeof chunk) <= 0) return;
    }
  }

  bool HasUnreadInput() override {
    // The driver holds nothing unasked: a reply is fetched by the read itself.
    if (fd_ < 0 || driver_) return false;
    pollfd p{fd_, POLLIN, 0};
    return ::poll(&p, 1, 0) > 0 && (p.revents & POLLIN) != 0;
  }

  Status Reconnect() override {
    Close();
    return Open().WithContext("reconnecting");
  }

  std::string Address() const override { return addr_.text; }

 private:
  static Result<int> OpenPath(const std::string& path) {
    int fd = ::open(path.c_str(), O_RDWR | O_CLOEXEC);
    if (fd < 0) {
      int err = errno;
      std::string hint = err == EACCES ? " (add a udev rule giving your group access, or join the group that owns it)"
                         : err == ENOENT ? " (is the instrument plugged in and the usbtmc driver loaded?)"
                                         : "";
      return IoError(fmt::format("open {}: {}{}", path, std::strerror(err), hint));
    }
    return fd;
  }

  void Close() {
    if (fd_ >= 0) ::close(fd_);
    fd_ = -1;
  }

  kp::Address addr_;
  UsbtmcOptions options_;
  std::string path_;
  int fd_ = -1;
  bool driver_ = false;
  int timeout_ms_ = 0;
};

}  // namespace

Result<std::unique_ptr<Transport>> OpenUsbtmcTransport(const Address& address, const UsbtmcOptions& options) {
  if (address.kind != Address::Kind::kUsbtmc) return InvalidInput(fmt::format("address '{}' is not a usbtmc address", address.text));
  auto t = std::make_unique<UsbtmcTransport>(address, options);
  Status st = t->Open();
  if (!st.ok()) return st.WithContext(address.text);
  return std::unique_ptr<Transport>(std::move(t));
}

}  // namespace kp
