#include "drivers/sim/sim_server.h"

#include <cerrno>
#include <chrono>
#include <cstdlib>
#include <cstring>

#include <arpa/inet.h>
#include <fcntl.h>
#include <netdb.h>
#include <netinet/in.h>
#include <netinet/tcp.h>
#include <poll.h>
#include <sys/socket.h>
#include <unistd.h>

#include <fmt/format.h>

#include "drivers/stream_transport.h"

namespace kp::sim {

struct SimServer::Impl {
  struct Conn {
    int fd = -1;
    size_t device = 0;
    bool is_pty = false;
    std::string in;
  };
  std::vector<ServedDevice> devices;
  std::vector<std::unique_ptr<FaultInjector>> injectors;
  std::vector<int> listeners;       // index = device (tcp)
  std::vector<int> pty_slaves;      // kept open so the master never sees a hang-up
  std::vector<Conn> conns;
  int wake[2] = {-1, -1};
  std::string eol = "\n";
  std::function<void(std::string_view)> note;

  ~Impl() {
    for (int fd : listeners) if (fd >= 0) ::close(fd);
    for (int fd : pty_slaves) if (fd >= 0) ::close(fd);
    for (auto& c : conns) if (c.fd >= 0) ::close(c.fd);
    for (int fd : wake) if (fd >= 0) ::close(fd);
  }
};

namespace {

std::string Errno(const char* what) { return fmt::format("{}: {}", what, std::strerror(errno)); }

Result<int> Listen(const std::string& host, int port, int& bound_port) {
  addrinfo hints{};
  hints.ai_family = AF_UNSPEC;
  hints.ai_socktype = SOCK_STREAM;
  hints.ai_flags = AI_PASSIVE;
  addrinfo* res = nullptr;
  std::string p = std::to_string(port);
  int gai = ::getaddrinfo(host.c_str(), p.c_str(), &hints, &res);
  if (gai != 0) return IoError(fmt::format("cannot resolve '{}': {}", host, ::gai_strerror(gai)));
  int fd = ::socket(res->ai_family, res->ai_socktype | SOCK_CLOEXEC | SOCK_NONBLOCK, res->ai_protocol);
  if (fd < 0) {
    ::freeaddrinfo(res);
    return IoError(Errno("socket"));
  }
  int one = 1;
  ::setsockopt(fd, SOL_SOCKET, SO_REUSEADDR, &one, sizeof one);
  if (::bind(fd, res->ai_addr, res->ai_addrlen) != 0 || ::listen(fd, 8) != 0) {
    Status st = IoError(fmt::format("{}:{}: {}", host, port, Errno("bind/listen")));
    ::freeaddrinfo(res);
    ::close(fd);
    return st;
  }
  ::freeaddrinfo(res);
  sockaddr_storage ss{};
  socklen_t len = sizeof ss;
  ::getsockname(fd, reinterpret_cast<sockaddr*>(&ss), &len);
  bound_port = ss.ss_family == AF_INET6 ? ntohs(reinterpret_cast<sockaddr_in6*>(&ss)->sin6_port)
                                        : ntohs(reinterpret_cast<sockaddr_in*>(&ss)->sin_port);
  return fd;
}

// A new pseudo-terminal: returns the master; `slave_path` and `slave_fd` (kept open, raw mode).
Result<int> OpenPty(std::string& slave_path, int& slave_fd) {
  int master = ::posix_openpt(O_RDWR | O_NOCTTY | O_CLOEXEC);
  if (master < 0) return IoError(Errno("posix_openpt"));
  if (::grantpt(master) != 0 || ::unlockpt(master) != 0) {
    Status st = IoError(Errno("grantpt/unlockpt"));
    ::close(master);
    return st;
  }
  char name[128];
  if (::ptsname_r(master, name, sizeof name) != 0) {
    Status st = IoError(Errno("ptsname"));
    ::close(master);
    return st;
  }
  slave_path = name;
  slave_fd = ::open(name, O_RDWR | O_NOCTTY | O_CLOEXEC);
  if (slave_fd < 0) {
    Status st = IoError(Errno("open pty"));
    ::close(master);
    return st;
  }
  // Raw mode: no echo, no line editing, no CR/LF translation.
  Status st = ConfigureTermios(slave_fd, SerialSettings{.baud = 115200}, slave_path);
  if (!st.ok()) {
    ::close(slave_fd);
    ::close(master);
    return st;
  }
  ::fcntl(master, F_SETFL, ::fcntl(master, F_GETFL) | O_NONBLOCK);
  return master;
}

void WriteAll(int fd, const std::string& data, bool socket) {
  size_t done = 0;
  for (int spins = 0; done < data.size() && spins < 1000; ++spins) {
    ssize_t n = socket ? ::send(fd, data.data() + done, data.size() - done, MSG_NOSIGNAL)
                       : ::write(fd, data.data() + done, data.size() - done);
    if (n > 0) {
      done += static_cast<size_t>(n);
    } else if (n < 0 && (errno == EAGAIN || errno == EINTR)) {
      pollfd p{fd, POLLOUT, 0};
      ::poll(&p, 1, 100);
    } else {
      return;
    }
  }
}

}  // namespace

Result<std::unique_ptr<SimServer>> SimServer::Start(const Address& listen, std::vector<ServedDevice> devices, FaultOptions faults,
                                                    std::function<void(std::string_view)> note) {
  if (listen.kind == Address::Kind::kSerial)
    return InvalidInput(fmt::format("'{}': the simulator listens on tcp:HOST:PORT or pty", listen.text));
  std::unique_ptr<SimServer> s(new SimServer());
  s->impl_ = std::make_unique<Impl>();
  Impl& im = *s->impl_;
  im.devices = std::move(devices);
  im.eol = listen.eol;
  im.note = std::move(note);
  if (::pipe2(im.wake, O_CLOEXEC | O_NONBLOCK) != 0) return IoError(Errno("pipe"));
  for (size_t i = 0; i < im.devices.size(); ++i) {
    im.injectors.push_back(std::make_unique<FaultInjector>(*im.devices[i].device, faults));
    std::string eol_opt = listen.eol == "\n" ? "" : "?eol=" + EolName(listen.eol);
    if (listen.kind == Address::Kind::kTcp) {
      int port = listen.port == 0 ? 0 : listen.port + static_cast<int>(i);
      int bound = 0;
      KP_ASSIGN_OR_RETURN(int fd, Listen(listen.host, port, bound));
      im.listeners.push_back(fd);
      s->client_addresses_.push_back(FormatTcpAddress(listen.host, bound) + eol_opt);
    } else {
      std::string path;
      int slave = -1;
      KP_ASSIGN_OR_RETURN(int master, OpenPty(path, slave));
      im.pty_slaves.push_back(slave);
      im.conns.push_back(Impl::Conn{master, i, true, {}});
      s->client_addresses_.push_back(fmt::format("serial:{}{}", path, eol_opt));
    }
  }
  s->thread_ = std::thread([p = s.get()] { p->Loop(); });
  return s;
}

SimServer::~SimServer() { Stop(); }

void SimServer::Stop() {
  if (!thread_.joinable()) return;
  char b = 'x';
  (void)!::write(impl_->wake[1], &b, 1);
  thread_.join();
}

int SimServer::faults_injected() const {
  int n = 0;
  for (const auto& f : impl_->injectors) n += f->faults_injected();
  return n;
}

void SimServer::Loop() {
  Impl& im = *impl_;
  for (;;) {
    std::vector<pollfd> fds;
    fds.push_back({im.wake[0], POLLIN, 0});
    for (int fd : im.listeners) fds.push_back({fd, POLLIN, 0});
    for (auto& c : im.conns) fds.push_back({c.fd, POLLIN, 0});
    int r = ::poll(fds.data(), fds.size(), 1000);
    if (r < 0 && errno != EINTR) return;
    if (r <= 0) continue;
    if (fds[0].revents != 0) return;
    size_t k = 1;
    for (size_t i = 0; i < im.listeners.size(); ++i, ++k) {
      if (!(fds[k].revents & POLLIN)) continue;
      int fd = ::accept4(im.listeners[i], nullptr, nullptr, SOCK_CLOEXEC | SOCK_NONBLOCK);
      if (fd < 0) continue;
      int one = 1;
      ::setsockopt(fd, IPPROTO_TCP, TCP_NODELAY, &one, sizeof one);
      im.conns.push_back(Impl::Conn{fd, i, false, {}});
    }
    size_t nconn = fds.size() - k;
    std::vector<size_t> closed;
    for (size_t ci = 0; ci < nconn; ++ci, ++k) {
      if (fds[k].revents == 0) continue;
      Impl::Conn& c = im.conns[ci];
      char chunk[4096];
      ssize_t n = ::read(c.fd, chunk, sizeof chunk);
      if (n <= 0) {
        if (n < 0 && (errno == EAGAIN || errno == EINTR)) continue;
        if (!c.is_pty) closed.push_back(ci);
        continue;
      }
      c.in.append(chunk, static_cast<size_t>(n));
      bool drop_conn = false;
      for (size_t pos; !drop_conn && (pos = c.in.find('\n')) != std::string::npos;) {
        std::string line = c.in.substr(0, pos);
        c.in.erase(0, pos + 1);
        if (!line.empty() && line.back() == '\r') line.pop_back();
        ++lines_;
        FaultedReply fr = im.injectors[c.device]->Respond(line);
        if (!fr.fault.empty() && im.note) im.note(fmt::format("{}: {} on '{}'", im.devices[c.device].name, fr.fault, line));
        if (fr.delay.count() > 0) std::this_thread::sleep_for(fr.delay);
        if (fr.reply) WriteAll(c.fd, *fr.reply + im.eol, !c.is_pty);
        if (fr.disconnect && !c.is_pty) drop_conn = true;
      }
      if (c.in.size() > 65536) c.in.clear();
      if (drop_conn) closed.push_back(ci);
    }
    for (auto it = closed.rbegin(); it != closed.rend(); ++it) {
      ::close(im.conns[*it].fd);
      im.conns.erase(im.conns.begin() + static_cast<long>(*it));
    }
  }
}

}  // namespace kp::sim
