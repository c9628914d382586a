// A VXI-11 instrument for tests: just enough ONC RPC (RFC 5531: call and
// accepted-reply headers, XDR, record marking on TCP) to serve
//   - the portmapper / rpcbind (program 100000, RFC 1833): NULL, version 2
//     GETPORT and versions 3-4 GETADDR, on UDP and TCP at a given port (111
//     is where clients look), answering DEVICE_CORE's TCP port;
//   - DEVICE_CORE (program 0x0607AF version 1, VXI-11 rev 1.0 B.6):
//     create_link, device_write, device_read, destroy_link, over TCP;
// with a LineDevice answering the lines written. A device_read with no reply
// waiting returns error 15 (I/O timeout), as an instrument does when nothing
// was asked. Binding port 111 needs a network namespace of the test's own
// (RunInPrivateNetwork) unless the process may bind it.
#pragma once

#include <atomic>
#include <deque>
#include <functional>
#include <memory>
#include <mutex>
#include <string>
#include <thread>
#include <vector>

#include "drivers/status.h"
#include "drivers/transport.h"

namespace kp::testing {

class Vxi11Peer {
 public:
  // Serves `device` with the portmapper on 127.0.0.1:`portmapper_port`
  // (0: any free port) and the core channel on a free port.
  static Result<std::unique_ptr<Vxi11Peer>> Start(LineDevice& device, int portmapper_port);
  ~Vxi11Peer();

  int portmapper_port() const { return pmap_port_; }
  int core_port() const { return core_port_; }
  // Device names create_link was asked for, in order.
  std::vector<std::string> links();
  int writes() const { return writes_; }

 private:
  Vxi11Peer(LineDevice& device) : device_(device) {}
  void ServeUdp();
  void AcceptLoop(int listen_fd, bool core);
  void ServeTcp(int fd, bool core);
  // One call's reply body (after the accepted-reply header), or false for a
  // procedure this peer does not serve.
  bool Dispatch(bool core, uint32_t prog, uint32_t vers, uint32_t proc, const std::string& args, std::string& result);

  LineDevice& device_;
  int pmap_udp_ = -1, pmap_tcp_ = -1, core_tcp_ = -1;
  int pmap_port_ = 0, core_port_ = 0;
  std::atomic<bool> stop_{false};
  std::vector<std::thread> threads_;
  std::mutex mu_;
  std::vector<std::string> links_;
  std::deque<std::string> replies_;
  std::atomic<int> writes_{0};
  int next_lid_ = 1;
};

// Runs `body` in a child process inside a network namespace of its own (a new
// user namespace too when not root), with its loopback up, so that it may
// serve port 111. Returns the child's message ("" = success), or nullopt when
// the system allows no such namespace (the caller skips).
std::optional<std::string> RunInPrivateNetwork(const std::function<std::string()>& body);

}  // namespace kp::testing
