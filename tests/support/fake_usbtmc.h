// A fake usbtmc device for tests: the opener hands the transport one end of a
// SOCK_SEQPACKET socket pair (message boundaries kept, as the usbtmc driver
// keeps them) and a thread answers each message with a LineDevice.
#pragma once

#include <atomic>
#include <mutex>
#include <optional>
#include <string>
#include <thread>
#include <vector>

#include <poll.h>
#include <sys/socket.h>
#include <unistd.h>

#include "drivers/usbtmc_transport.h"

namespace kp::testing {

// The instrument's end: reads one message at a time, answers queries.
class FakeUsbtmcPeer {
 public:
  explicit FakeUsbtmcPeer(LineDevice& device) : device_(device) {}
  ~FakeUsbtmcPeer() { Stop(); }

  // The opener the transport gets: a fresh pair per open (a re-plug).
  DeviceOpener Opener() {
    return [this](const std::string& path) -> Result<int> {
      std::lock_guard<std::mutex> lock(mu_);
      opened_paths_.push_back(path);
      Stop();
      int sv[2];
      if (::socketpair(AF_UNIX, SOCK_SEQPACKET | SOCK_CLOEXEC, 0, sv) != 0) return IoError("socketpair");
      peer_fd_ = sv[1];
      stop_ = false;
      thread_ = std::thread([this, fd = sv[1]] { Serve(fd); });
      return sv[0];
    };
  }

  std::vector<std::string> messages() {
    std::lock_guard<std::mutex> lock(msgs_mu_);
    return messages_;
  }
  std::vector<std::string> opened_paths() {
    std::lock_guard<std::mutex> lock(mu_);
    return opened_paths_;
  }
  std::atomic<int> drop_next_replies{0};  // answer nothing to the next N queries
  std::atomic<bool> hang_up_next{false};  // close the device at the next message

 private:
  void Serve(int fd) {
    char buf[4096];
    while (!stop_) {
      pollfd p{fd, POLLIN, 0};
      if (::poll(&p, 1, 20) <= 0) continue;
      ssize_t n = ::read(fd, buf, sizeof buf);
      if (n <= 0) break;
      std::string msg(buf, static_cast<size_t>(n));
      {
        std::lock_guard<std::mutex> lock(msgs_mu_);
        messages_.push_back(msg);
      }
      if (hang_up_next.exchange(false)) {
        ::shutdown(fd, SHUT_RDWR);
        break;
      }
      std::string line = msg;
      while (!line.empty() && (line.back() == '\n' || line.back() == '\r')) line.pop_back();
      std::optional<std::string> reply = device_.HandleLine(line);
      if (!reply) continue;
      if (drop_next_replies > 0) {
        --drop_next_replies;
        continue;
      }
      std::string out = *reply + "\n";
      (void)!::write(fd, out.data(), out.size());
    }
  }
  void Stop() {
    stop_ = true;
    if (thread_.joinable()) thread_.join();
    if (peer_fd_ >= 0) ::close(peer_fd_);
    peer_fd_ = -1;
  }

  LineDevice& device_;
  std::mutex mu_, msgs_mu_;
  std::vector<std::string> messages_, opened_paths_;
  std::thread thread_;
  std::atomic<bool> stop_{false};
  int peer_fd_ = -1;
};

}  // namespace kp::testing
