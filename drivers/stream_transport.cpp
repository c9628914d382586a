#include "drivers/stream_transport.h"

#include <cerrno>
#include <chrono>
#include <cstring>

#include <fcntl.h>
#include <libserialport.h>
#include <netdb.h>
#include <netinet/in.h>
#include <netinet/tcp.h>
#include <poll.h>
#include <sys/socket.h>
#include <termios.h>
#include <unistd.h>

#include <fmt/format.h>

#include "drivers/vxi11_transport.h"

namespace kp {
namespace {

std::string Errno(const char* what) { return fmt::format("{}: {}", what, std::strerror(errno)); }

int PollMs(std::chrono::steady_clock::time_point deadline) {
  auto left = std::chrono::duration_cast<std::chrono::milliseconds>(deadline - std::chrono::steady_clock::now()).count();
  return left < 0 ? 0 : static_cast<int>(left);
}

// Common line framing over a file descriptor.
class FdTransport : public Transport {
 public:
  FdTransport(kp::Address address, StreamOptions options) : addr_(std::move(address)), options_(std::move(options)) {}
  ~FdTransport() override = default;

  Status WriteLine(std::string_view line) override {
    if (fd_ < 0) return IoError(fmt::format("{}: link is closed", addr_.text));
    std::string out(line);
    out += addr_.eol;
    size_t done = 0;
    auto deadline = std::chrono::steady_clock::now() + std::chrono::seconds(5);
    while (done < out.size()) {
      ssize_t n = WriteSome(out.data() + done, out.size() - done);
      if (n > 0) {
        done += static_cast<size_t>(n);
        continue;
      }
      if (n < 0 && errno == EINTR) continue;
      if (n < 0 && (errno == EAGAIN || errno == EWOULDBLOCK)) {
        pollfd p{fd_, POLLOUT, 0};
        if (::poll(&p, 1, PollMs(deadline)) <= 0) return TimeoutError(fmt::format("{}: write stalled", addr_.text));
        continue;
      }
      Status st = IoError(fmt::format("{}: {}", addr_.text, Errno("write")));
      CloseFd();
      return st;
    }
    return Status::Ok();
  }

  Result<std::string> ReadLine(Seconds timeout) override {
    if (fd_ < 0) return IoError(fmt::format("{}: link is closed", addr_.text));
    auto deadline = std::chrono::steady_clock::now() + std::chrono::duration_cast<std::chrono::steady_clock::duration>(timeout);
    for (;;) {
      size_t pos = buffer_.find(addr_.eol);
      if (pos != std::string::npos) {
        std::string line = buffer_.substr(0, pos);
        buffer_.erase(0, pos + addr_.eol.size());
        // Tolerate a stray CR from instruments that always send CRLF.
        if (!line.empty() && line.back() == '\r') line.pop_back();
        return line;
      }
      if (buffer_.size() > 65536) {
        buffer_.clear();
        return ProtocolError(fmt::format("{}: reply longer than 64 KiB without a terminator ({})", addr_.text, EolName(addr_.eol)));
      }
      pollfd p{fd_, POLLIN, 0};
      int r = ::poll(&p, 1, PollMs(deadline));
      if (r < 0 && errno == EINTR) continue;
      if (r < 0) return IoError(fmt::format("{}: {}", addr_.text, Errno("poll")));
      if (r == 0)
        return TimeoutError(fmt::format("no reply from {} within {:.3g} s", addr_.text, timeout.count()));
      char chunk[4096];
      ssize_t n = ::read(fd_, chunk, sizeof chunk);
      if (n > 0) {
        buffer_.append(chunk, static_cast<size_t>(n));
        continue;
      }
      if (n < 0 && (errno == EINTR || errno == EAGAIN || errno == EWOULDBLOCK)) continue;
      Status st = IoError(fmt::format("{}: {}", addr_.text, n == 0 ? std::string("link closed by the other end") : Errno("read")));
      CloseFd();
      return st;
    }
  }

  void Flush() override {
    buffer_.clear();
    if (fd_ < 0) return;
    char chunk[4096];
    for (int i = 0; i < 64; ++i) {  // bounded: a chattering device cannot hold us here
      pollfd p{fd_, POLLIN, 0};
      if (::poll(&p, 1, 0) <= 0 || !(p.revents & POLLIN)) return;
      if (::read(fd_, chunk, sizeof chunk) <= 0) return;
    }
  }

  bool HasUnreadInput() override {
    if (!buffer_.empty()) return true;
    if (fd_ < 0) return false;
    pollfd p{fd_, POLLIN, 0};
    return ::poll(&p, 1, 0) > 0 && (p.revents & POLLIN) != 0;
  }

  Status Reconnect() override {
    Close();
    buffer_.clear();
    return Open().WithContext("reconnecting");
  }

  std::string Address() const override { return addr_.text; }

  virtual Status Open() = 0;

 protected:
  virtual ssize_t WriteSome(const char* data, size_t size) { return ::write(fd_, data, size); }
  virtual void Close() { CloseFd(); }
  void CloseFd() {
    if (fd_ >= 0) ::close(fd_);
    fd_ = -1;
  }
  void Note(std::string_view text) const {
    if (options_.note) options_.note(text);
  }

  kp::Address addr_;
  StreamOptions options_;
  int fd_ = -1;
  std::string buffer_;
};

class TcpTransport final : public FdTransport {
 public:
  using FdTransport::FdTransport;
  ~TcpTransport() override { CloseFd(); }

  Status Open() override {
    addrinfo hints{};
    hints.ai_family = AF_UNSPEC;
    hints.ai_socktype = SOCK_STREAM;
    addrinfo* res = nullptr;
    std::string port = std::to_string(addr_.port);
    int gai = ::getaddrinfo(addr_.host.c_str(), port.c_str(), &hints, &res);
    if (gai != 0) return IoError(fmt::format("{}: cannot resolve '{}': {}", addr_.text, addr_.host, ::gai_strerror(gai)));
    Status last = IoError(fmt::format("{}: no address to connect to", addr_.text));
    for (addrinfo* ai = res; ai != nullptr; ai = ai->ai_next) {
      last = TryConnect(ai);
      if (last.ok()) break;
    }
    ::freeaddrinfo(res);
    return last;
  }

 protected:
  ssize_t WriteSome(const char* data, size_t size) override { return ::send(fd_, data, size, MSG_NOSIGNAL); }

 private:
  Status TryConnect(const addrinfo* ai) {
    int fd = ::socket(ai->ai_family, ai->ai_socktype | SOCK_CLOEXEC | SOCK_NONBLOCK, ai->ai_protocol);
    if (fd < 0) return IoError(fmt::format("{}: {}", addr_.text, Errno("socket")));
    int one = 1;
    ::setsockopt(fd, IPPROTO_TCP, TCP_NODELAY, &one, sizeof one);
    int r = ::connect(fd, ai->ai_addr, ai->ai_addrlen);
    if (r < 0 && errno == EINPROGRESS) {
      pollfd p{fd, POLLOUT, 0};
      int ms = static_cast<int>(options_.connect_timeout.count() * 1000.0);
      r = ::poll(&p, 1, ms);
      if (r == 0) {
        ::close(fd);
        return TimeoutError(fmt::format("{}: no connection within {:.3g} s", addr_.text, options_.connect_timeout.count()));
      }
      int err = 0;
      socklen_t len = sizeof err;
      ::getsockopt(fd, SOL_SOCKET, SO_ERROR, &err, &len);
      if (err != 0) {
        ::close(fd);
        return IoError(fmt::format("{}: connect: {}", addr_.text, std::strerror(err)));
      }
    } else if (r < 0) {
      Status st = IoError(fmt::format("{}: {}", addr_.text, Errno("connect")));
      ::close(fd);
      return st;
    }
    fd_ = fd;
    return Status::Ok();
  }
};

speed_t BaudConstant(int baud, bool& ok) {
  ok = true;
  switch (baud) {
    case 50: return B50; case 75: return B75; case 110: return B110; case 134: return B134; case 150: return B150;
    case 200: return B200; case 300: return B300; case 600: return B600; case 1200: return B1200; case 1800: return B1800;
    case 2400: return B2400; case 4800: return B4800; case 9600: return B9600; case 19200: return B19200;
    case 38400: return B38400; case 57600: return B57600; case 115200: return B115200; case 230400: return B230400;
    case 460800: return B460800; case 921600: return B921600; case 1000000: return B1000000; case 2000000: return B2000000;
    default: ok = false; return B9600;
  }
}

class SerialTransport final : public FdTransport {
 public:
  using FdTransport::FdTransport;
  ~SerialTransport() override { Close(); }

  Status Open() override {
    bool pty = addr_.path.starts_with("/dev/pts/");
    if (!pty) {
      Status st = OpenWithLibserialport();
      if (st.ok()) return st;
      Note(fmt::format("{}: libserialport refused the port ({}); using POSIX termios", addr_.text, st.message()));
    } else if (!noted_) {
      Note(fmt::format("{}: pseudo-terminal, using POSIX termios (libserialport cannot open ptys)", addr_.text));
      noted_ = true;
    }
    return OpenWithTermios();
  }

 protected:
  void Close() override {
    if (port_ != nullptr) {
      sp_close(port_);
      sp_free_port(port_);
      port_ = nullptr;
      fd_ = -1;
    }
    CloseFd();
  }

 private:
  Status OpenWithLibserialport() {
    sp_port* port = nullptr;
    if (sp_get_port_by_name(addr_.path.c_str(), &port) != SP_OK) return IoError(LastSpError("no such port"));
    if (sp_open(port, SP_MODE_READ_WRITE) != SP_OK) {
      std::string m = LastSpError("open");
      sp_free_port(port);
      return IoError(m);
    }
    const SerialSettings& s = addr_.serial;
    sp_parity parity = s.parity == Parity::kOdd ? SP_PARITY_ODD : s.parity == Parity::kEven ? SP_PARITY_EVEN : SP_PARITY_NONE;
    sp_flowcontrol flow = s.flow == FlowControl::kRtsCts ? SP_FLOWCONTROL_RTSCTS
                          : s.flow == FlowControl::kXonXoff ? SP_FLOWCONTROL_XONXOFF : SP_FLOWCONTROL_NONE;
    if (sp_set_baudrate(port, s.baud) != SP_OK || sp_set_bits(port, s.data_bits) != SP_OK || sp_set_parity(port, parity) != SP_OK ||
        sp_set_stopbits(port, s.stop_bits) != SP_OK || sp_set_flowcontrol(port, flow) != SP_OK) {
      std::string m = LastSpError("configure");
      sp_close(port);
      sp_free_port(port);
      return IoError(m);
    }
    int fd = -1;
    if (sp_get_port_handle(port, &fd) != SP_OK || fd < 0) {
      sp_close(port);
      sp_free_port(port);
      return IoError("no file descriptor for the port");
    }
    port_ = port;
    fd_ = fd;
    return Status::Ok();
  }

  Status OpenWithTermios() {
    int fd = ::open(addr_.path.c_str(), O_RDWR | O_NOCTTY | O_NONBLOCK | O_CLOEXEC);
    if (fd < 0) return IoError(fmt::format("{}: {}", addr_.text, Errno("open")));
    Status st = ConfigureTermios(fd, addr_.serial, addr_.text);
    if (!st.ok()) {
      ::close(fd);
      return st;
    }
    fd_ = fd;
    return Status::Ok();
  }

  static std::string LastSpError(const char* what) {
    char* m = sp_last_error_message();
    std::string out = fmt::format("{}: {}", what, m != nullptr ? m : "unknown error");
    if (m != nullptr) sp_free_error_message(m);
    return out;
  }

  sp_port* port_ = nullptr;
  bool noted_ = false;
};

}  // namespace

Status ConfigureTermios(int fd, const SerialSettings& s, const std::string& what) {
  termios t{};
  if (::tcgetattr(fd, &t) != 0) return IoError(fmt::format("{}: {}", what, Errno("tcgetattr")));
  ::cfmakeraw(&t);
  bool ok = false;
  speed_t speed = BaudConstant(s.baud, ok);
  if (!ok) return InvalidInput(fmt::format("{}: baud {} is not a standard rate for termios", what, s.baud));
  ::cfsetispeed(&t, speed);
  ::cfsetospeed(&t, speed);
  t.c_cflag &= ~static_cast<tcflag_t>(CSIZE | PARENB | PARODD | CSTOPB | CRTSCTS);
  t.c_cflag |= CLOCAL | CREAD;
  t.c_cflag |= s.data_bits == 5 ? CS5 : s.data_bits == 6 ? CS6 : s.data_bits == 7 ? CS7 : CS8;
  if (s.parity != Parity::kNone) t.c_cflag |= PARENB;
  if (s.parity == Parity::kOdd) t.c_cflag |= PARODD;
  if (s.stop_bits == 2) t.c_cflag |= CSTOPB;
  if (s.flow == FlowControl::kRtsCts) t.c_cflag |= CRTSCTS;
  if (s.flow == FlowControl::kXonXoff) t.c_iflag |= IXON | IXOFF;
  t.c_cc[VMIN] = 0;
  t.c_cc[VTIME] = 0;
  if (::tcsetattr(fd, TCSANOW, &t) != 0) return IoError(fmt::format("{}: {}", what, Errno("tcsetattr")));
  return Status::Ok();
}

Result<std::unique_ptr<Transport>> OpenTransport(const Address& address, const StreamOptions& options) {
  std::unique_ptr<FdTransport> t;
  switch (address.kind) {
    case Address::Kind::kTcp:
      if (address.port == 0) return InvalidInput(fmt::format("address '{}': port 0 is only for listening", address.text));
      t = std::make_unique<TcpTransport>(address, options);
      break;
    case Address::Kind::kSerial: t = std::make_unique<SerialTransport>(address, options); break;
    case Address::Kind::kPty:
      return InvalidInput(fmt::format("address '{}': 'pty' is for `kneepoint sim`; connect with serial:/dev/pts/N", address.text));
    case Address::Kind::kUsbtmc: return OpenUsbtmcTransport(address, options.usbtmc);
    case Address::Kind::kVxi11: return OpenVxi11Transport(address, options.connect_timeout);
  }
  KP_RETURN_IF_ERROR(t->Open());
  return std::unique_ptr<Transport>(std::move(t));
}

Result<std::unique_ptr<Transport>> OpenTransport(std::string_view address, const StreamOptions& options) {
  KP_ASSIGN_OR_RETURN(Address a, ParseAddress(address));
  return OpenTransport(a, options);
}

}  // namespace kp
