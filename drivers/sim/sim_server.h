// SimServer: serves simulated instruments over real links so the rig can talk
// to them exactly as to hardware — each instrument on its own TCP port
// (listen address tcp:HOST:PORT gives PORT, PORT+1, ...; port 0 picks free
// ports) or its own pseudo-terminal (listen address `pty`).
//
// One background thread polls every listener and connection; Stop() (or the
// destructor) ends it and closes everything. Lines end in LF (a CR before it
// is ignored); replies end in the listen address's terminator. Each
// instrument goes through a FaultInjector built from `faults`.
//
// The served LineDevices must outlive the server and be thread-safe
// (SimBench's are). Bind to loopback unless the user asked otherwise; the
// caller says so to the user.
#pragma once

#include <atomic>
#include <functional>
#include <memory>
#include <string>
#include <string_view>
#include <thread>
#include <vector>

#include "drivers/address.h"
#include "drivers/sim/fault_injector.h"
#include "drivers/transport.h"

namespace kp::sim {

struct ServedDevice {
  std::string name;  // "load", "meter", "thermometer"
  LineDevice* device = nullptr;
};

class SimServer {
 public:
  // Opens listeners (or ptys) for every device and starts the thread.
  static Result<std::unique_ptr<SimServer>> Start(const Address& listen, std::vector<ServedDevice> devices,
                                                   FaultOptions faults = {},
                                                   std::function<void(std::string_view)> note = nullptr);
  ~SimServer();
  SimServer(const SimServer&) = delete;
  SimServer& operator=(const SimServer&) = delete;

  // Client addresses, one per device in order: "tcp:127.0.0.1:40123" or "serial:/dev/pts/7".
  const std::vector<std::string>& client_addresses() const { return client_addresses_; }
  // Lines handled and faults injected so far (all devices).
  long lines_handled() const { return lines_.load(); }
  int faults_injected() const;
  void Stop();

 private:
  SimServer() = default;
  void Loop();
  struct Impl;
  std::unique_ptr<Impl> impl_;
  std::vector<std::string> client_addresses_;
  std::atomic<long> lines_{0};
  std::thread thread_;
};

}  // namespace kp::sim
