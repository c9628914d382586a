#include "tests/support/vxi11_peer.h"

#include <algorithm>
#include <cerrno>
#include <cstring>
#include <optional>

#include <arpa/inet.h>
#include <fcntl.h>
#include <net/if.h>
#include <netinet/in.h>
#include <poll.h>
#include <sched.h>
#include <sys/ioctl.h>
#include <sys/socket.h>
#include <sys/wait.h>
#include <unistd.h>

#include <fmt/format.h>

namespace kp::testing {
namespace {

constexpr uint32_t kPortmapper = 100000;
constexpr uint32_t kDeviceCore = 0x0607AF;

void PutU32(std::string& out, uint32_t v) {
  out += static_cast<char>(v >> 24);
  out += static_cast<char>(v >> 16);
  out += static_cast<char>(v >> 8);
  out += static_cast<char>(v);
}

void PutOpaque(std::string& out, std::string_view data) {
  PutU32(out, static_cast<uint32_t>(data.size()));
  out += data;
  while (out.size() % 4 != 0) out += '\0';
}

// XDR reader; a short message reads as zeros (the peer is for tests).
struct Xdr {
  std::string_view in;
  size_t pos = 0;
  uint32_t U32() {
    if (pos + 4 > in.size()) {
      pos = in.size();
      return 0;
    }
    auto b = [&](size_t i) { return static_cast<uint32_t>(static_cast<unsigned char>(in[pos + i])); };
    uint32_t v = b(0) << 24 | b(1) << 16 | b(2) << 8 | b(3);
    pos += 4;
    return v;
  }
  std::string Opaque() {
    uint32_t n = U32();
    if (pos + n > in.size()) n = static_cast<uint32_t>(in.size() - pos);
    std::string s(in.substr(pos, n));
    pos += (n + 3) / 4 * 4;
    if (pos > in.size()) pos = in.size();
    return s;
  }
};

int Listen(int type, int port, int& bound_port) {
  int fd = ::socket(AF_INET, type | SOCK_CLOEXEC, 0);
  if (fd < 0) return -1;
  int one = 1;
  ::setsockopt(fd, SOL_SOCKET, SO_REUSEADDR, &one, sizeof one);
  sockaddr_in a{};
  a.sin_family = AF_INET;
  a.sin_port = htons(static_cast<uint16_t>(port));
  a.sin_addr.s_addr = htonl(INADDR_LOOPBACK);
  if (::bind(fd, reinterpret_cast<sockaddr*>(&a), sizeof a) != 0 || (type == SOCK_STREAM && ::listen(fd, 8) != 0)) {
    ::close(fd);
    return -1;
  }
  socklen_t len = sizeof a;
  ::getsockname(fd, reinterpret_cast<sockaddr*>(&a), &len);
  bound_port = ntohs(a.sin_port);
  return fd;
}

bool ReadFull(int fd, char* buf, size_t n, const std::atomic<bool>& stop) {
  size_t done = 0;
  while (done < n) {
    pollfd p{fd, POLLIN, 0};
    int r = ::poll(&p, 1, 50);
    if (stop) return false;
    if (r <= 0) continue;
    ssize_t got = ::read(fd, buf + done, n - done);
    if (got <= 0) return false;
    done += static_cast<size_t>(got);
  }
  return true;
}

}  // namespace

Result<std::unique_ptr<Vxi11Peer>> Vxi11Peer::Start(LineDevice& device, int portmapper_port) {
  std::unique_ptr<Vxi11Peer> p(new Vxi11Peer(device));
  int udp_port = 0;
  p->core_tcp_ = Listen(SOCK_STREAM, 0, p->core_port_);
  p->pmap_tcp_ = Listen(SOCK_STREAM, portmapper_port, p->pmap_port_);
  p->pmap_udp_ = p->pmap_tcp_ >= 0 ? Listen(SOCK_DGRAM, p->pmap_port_, udp_port) : -1;
  if (p->core_tcp_ < 0 || p->pmap_tcp_ < 0 || p->pmap_udp_ < 0)
    return IoError(fmt::format("vxi11 peer: cannot listen (portmapper port {}): {}", portmapper_port, std::strerror(errno)));
  Vxi11Peer* self = p.get();
  self->threads_.emplace_back([self] { self->ServeUdp(); });
  self->threads_.emplace_back([self] { self->AcceptLoop(self->pmap_tcp_, false); });
  self->threads_.emplace_back([self] { self->AcceptLoop(self->core_tcp_, true); });
  return p;
}

Vxi11Peer::~Vxi11Peer() {
  stop_ = true;
  std::vector<std::thread> threads;
  {
    std::lock_guard<std::mutex> lock(mu_);
    threads.swap(threads_);
  }
  for (std::thread& t : threads) t.join();
  // Connection threads started after the swap.
  for (;;) {
    std::vector<std::thread> more;
    {
      std::lock_guard<std::mutex> lock(mu_);
      more.swap(threads_);
    }
    if (more.empty()) break;
    for (std::thread& t : more) t.join();
  }
  for (int fd : {pmap_udp_, pmap_tcp_, core_tcp_})
    if (fd >= 0) ::close(fd);
}

std::vector<std::string> Vxi11Peer::links() {
  std::lock_guard<std::mutex> lock(mu_);
  return links_;
}

namespace {

// The reply to one RPC call message; empty when it is not a call.
std::string Answer(std::string_view msg, const std::function<bool(uint32_t, uint32_t, uint32_t, const std::string&, std::string&)>& dispatch) {
  Xdr x{msg};
  uint32_t xid = x.U32();
  if (x.U32() != 0) return {};  // not a CALL
  x.U32();                      // rpcvers
  uint32_t prog = x.U32(), vers = x.U32(), proc = x.U32();
  x.U32();
  x.Opaque();  // credentials
  x.U32();
  x.Opaque();  // verifier
  std::string args(msg.substr(x.pos));
  std::string out;
  PutU32(out, xid);
  PutU32(out, 1);  // REPLY
  PutU32(out, 0);  // MSG_ACCEPTED
  PutU32(out, 0);  // verifier AUTH_NONE
  PutU32(out, 0);
  std::string result;
  if (!dispatch(prog, vers, proc, args, result)) {
    PutU32(out, 3);  // PROC_UNAVAIL
    return out;
  }
  PutU32(out, 0);  // SUCCESS
  return out + result;
}

}  // namespace

void Vxi11Peer::ServeUdp() {
  char buf[2048];
  while (!stop_) {
    pollfd p{pmap_udp_, POLLIN, 0};
    if (::poll(&p, 1, 50) <= 0) continue;
    sockaddr_storage from{};
    socklen_t len = sizeof from;
    ssize_t n = ::recvfrom(pmap_udp_, buf, sizeof buf, 0, reinterpret_cast<sockaddr*>(&from), &len);
    if (n <= 0) continue;
    std::string reply = Answer(std::string_view(buf, static_cast<size_t>(n)), [&](uint32_t prog, uint32_t vers, uint32_t proc,
                                                                                     const std::string& args, std::string& r) {
      return Dispatch(false, prog, vers, proc, args, r);
    });
    if (!reply.empty()) ::sendto(pmap_udp_, reply.data(), reply.size(), 0, reinterpret_cast<sockaddr*>(&from), len);
  }
}

void Vxi11Peer::AcceptLoop(int listen_fd, bool core) {
  while (!stop_) {
    pollfd p{listen_fd, POLLIN, 0};
    if (::poll(&p, 1, 50) <= 0) continue;
    int fd = ::accept4(listen_fd, nullptr, nullptr, SOCK_CLOEXEC);
    if (fd < 0) continue;
    std::lock_guard<std::mutex> lock(mu_);
    threads_.emplace_back([this, fd, core] { ServeTcp(fd, core); });
  }
}

void Vxi11Peer::ServeTcp(int fd, bool core) {
  for (;;) {
    std::string msg;
    bool last = false;
    while (!last) {  // record marking: fragments up to the one with the high bit
      char mark[4];
      if (!ReadFull(fd, mark, 4, stop_)) {
        ::close(fd);
        return;
      }
      Xdr x{std::string_view(mark, 4)};
      uint32_t m = x.U32();
      last = (m & 0x80000000u) != 0;
      size_t n = m & 0x7fffffffu;
      if (n > (1u << 20)) {
        ::close(fd);
        return;
      }
      std::string frag(n, '\0');
      if (!ReadFull(fd, frag.data(), n, stop_)) {
        ::close(fd);
        return;
      }
      msg += frag;
    }
    std::string reply = Answer(msg, [&](uint32_t prog, uint32_t vers, uint32_t proc, const std::string& args, std::string& r) {
      return Dispatch(core, prog, vers, proc, args, r);
    });
    if (reply.empty()) continue;
    std::string framed;
    PutU32(framed, 0x80000000u | static_cast<uint32_t>(reply.size()));
    framed += reply;
    if (::send(fd, framed.data(), framed.size(), MSG_NOSIGNAL) != static_cast<ssize_t>(framed.size())) {
      ::close(fd);
      return;
    }
  }
}

bool Vxi11Peer::Dispatch(bool core, uint32_t prog, uint32_t vers, uint32_t proc, const std::string& args, std::string& r) {
  if (proc == 0) return true;  // NULL, either program
  Xdr x{args};
  if (!core) {
    if (prog != kPortmapper || proc != 3) return false;
    uint32_t want = x.U32();
    x.U32();  // version
    if (vers == 2) {  // PMAPPROC_GETPORT: mapping {prog, vers, prot, port} -> port
      uint32_t protocol = x.U32();
      PutU32(r, want == kDeviceCore && protocol == IPPROTO_TCP ? static_cast<uint32_t>(core_port_) : 0u);
      return true;
    }
    // RPCBPROC_GETADDR (versions 3 and 4): rpcb {prog, vers, netid, addr,
    // owner} -> universal address "h1.h2.h3.h4.p1.p2" ("" when not served).
    std::string netid = x.Opaque();
    bool tcp = netid == "tcp" || netid == "tcp6";
    PutOpaque(r, want == kDeviceCore && tcp ? fmt::format("127.0.0.1.{}.{}", core_port_ >> 8, core_port_ & 0xff) : std::string());
    return true;
  }
  if (prog != kDeviceCore) return false;
  std::lock_guard<std::mutex> lock(mu_);
  switch (proc) {
    case 10: {  // create_link
      x.U32();
      x.U32();
      x.U32();
      links_.push_back(x.Opaque());
      PutU32(r, 0);               // error
      PutU32(r, static_cast<uint32_t>(next_lid_++));  // lid
      PutU32(r, 0);               // abortPort
      PutU32(r, 1u << 20);        // maxRecvSize
      return true;
    }
    case 11: {  // device_write
      x.U32();
      x.U32();
      x.U32();
      uint32_t flags = x.U32();
      std::string data = x.Opaque();
      ++writes_;
      static thread_local std::string pending;
      pending += data;
      size_t nl;
      while ((nl = pending.find('\n')) != std::string::npos) {
        std::string line = pending.substr(0, nl);
        pending.erase(0, nl + 1);
        if (!line.empty() && line.back() == '\r') line.pop_back();
        if (std::optional<std::string> reply = device_.HandleLine(line)) replies_.push_back(*reply + "\n");
      }
      if ((flags & 8u) != 0 && !pending.empty()) {  // END without a terminator
        if (std::optional<std::string> reply = device_.HandleLine(pending)) replies_.push_back(*reply + "\n");
        pending.clear();
      }
      PutU32(r, 0);
      PutU32(r, static_cast<uint32_t>(data.size()));
      return true;
    }
    case 12: {  // device_read
      x.U32();
      uint32_t request = x.U32();
      if (replies_.empty()) {
        PutU32(r, 15);  // I/O timeout
        PutU32(r, 0);
        PutOpaque(r, "");
        return true;
      }
      std::string& front = replies_.front();
      std::string part = front.substr(0, std::max<uint32_t>(request, 1));
      front.erase(0, part.size());
      bool end = front.empty();
      if (end) replies_.pop_front();
      PutU32(r, 0);
      PutU32(r, end ? 4u : 1u);  // reason: END, or REQCNT
      PutOpaque(r, part);
      return true;
    }
    case 23:  // destroy_link
      PutU32(r, 0);
      return true;
    default:
      return false;
  }
}

std::optional<std::string> RunInPrivateNetwork(const std::function<std::string()>& body) {
  int pipefd[2];
  if (::pipe2(pipefd, O_CLOEXEC) != 0) return "pipe failed";
  pid_t pid = ::fork();
  if (pid < 0) return "fork failed";
  if (pid == 0) {
    ::close(pipefd[0]);
    ::alarm(60);  // a hung body ends as a failure naming SIGALRM, not as a ctest timeout
    int flags = CLONE_NEWNET | (::geteuid() == 0 ? 0 : CLONE_NEWUSER);
    if (::unshare(flags) != 0) ::_exit(77);
    int s = ::socket(AF_INET, SOCK_DGRAM | SOCK_CLOEXEC, 0);
    ifreq ifr{};
    std::strncpy(ifr.ifr_name, "lo", IFNAMSIZ - 1);
    if (s < 0 || ::ioctl(s, SIOCGIFFLAGS, &ifr) != 0) ::_exit(77);
    ifr.ifr_flags = static_cast<short>(ifr.ifr_flags | IFF_UP);
    if (::ioctl(s, SIOCSIFFLAGS, &ifr) != 0) ::_exit(77);
    ::close(s);
    std::string message = body();
    (void)!::write(pipefd[1], message.data(), message.size());
    ::_exit(message.empty() ? 0 : 1);
  }
  ::close(pipefd[1]);
  std::string message;
  char buf[512];
  for (ssize_t n; (n = ::read(pipefd[0], buf, sizeof buf)) > 0;) message.append(buf, static_cast<size_t>(n));
  ::close(pipefd[0]);
  int status = 0;
  ::waitpid(pid, &status, 0);
  if (WIFEXITED(status) && WEXITSTATUS(status) == 77) return std::nullopt;
  if (!WIFEXITED(status)) return fmt::format("the child ended by signal {}", WTERMSIG(status));
  if (WEXITSTATUS(status) != 0 && message.empty()) return fmt::format("the child exited with {}", WEXITSTATUS(status));
  return message;
}

}  // namespace kp::testing
