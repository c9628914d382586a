#include "drivers/vxi11_transport.h"

#include <algorithm>
#include <mutex>
#include <string>
#include <vector>

#include <fmt/format.h>
#include <lxi.h>

#include "drivers/stream_transport.h"

namespace kp {
namespace {

int Ms(Seconds s) { return std::max(1, static_cast<int>(s.count() * 1000.0)); }

class Vxi11Transport final : public Transport {
 public:
  Vxi11Transport(kp::Address address, Seconds connect_timeout) : addr_(std::move(address)), connect_timeout_(connect_timeout) {}
  ~Vxi11Transport() override { Close(); }

  Status Open() {
    static std::once_flag init;
    std::call_once(init, [] { lxi_init(); });
    // A VXI-11 instrument answers the portmapper on TCP port 111 (VXI-11
    // rev. 1.0, B.1.1, from memory). Try that first, bounded by the connect
    // timeout: the RPC library's own lookup has retries and timeouts of its
    // own that connect_timeout does not bound, and with nobody at the address
    // it was once seen to wait for minutes.
    kp::Address portmapper;
    portmapper.kind = kp::Address::Kind::kTcp;
    portmapper.host = addr_.host;
    portmapper.port = 111;
    portmapper.text = FormatTcpAddress(addr_.host, 111);
    StreamOptions probe_options;
    probe_options.connect_timeout = connect_timeout_;
    if (auto probe = OpenTransport(portmapper, probe_options); !probe.ok())
      return IoError(fmt::format("{}: no VXI-11 instrument answers at {} (its portmapper, TCP port 111: {})", addr_.text, addr_.host,
                                 probe.status().message()));
    int id = lxi_connect(addr_.host.c_str(), 0, addr_.vxi11_device.c_str(), Ms(connect_timeout_), VXI11);
    if (id < 0)
      return IoError(fmt::format("{}: no VXI-11 link to device '{}' on {} (portmapper or create_link failed within {:.3g} s)",
                                 addr_.text, addr_.vxi11_device, addr_.host, connect_timeout_.count()));
    id_ = id;
    return Status::Ok();
  }

  Status WriteLine(std::string_view line) override {
    if (id_ < 0) return IoError(fmt::format("{}: link is closed", addr_.text));
    std::string out(line);
    out += addr_.eol;
    int n = lxi_send(id_, out.data(), static_cast<int>(out.size()), Ms(write_timeout_));
    if (n != static_cast<int>(out.size())) {
      Close();
      return IoError(fmt::format("{}: device_write failed", addr_.text));
    }
    return Status::Ok();
  }

  Result<std::string> ReadLine(Seconds timeout) override {
    if (id_ < 0) return IoError(fmt::format("{}: link is closed", addr_.text));
    std::vector<char> buf(65536);
    int n = lxi_receive(id_, buf.data(), static_cast<int>(buf.size()), Ms(timeout));
    if (n < 0) return TimeoutError(fmt::format("no reply from {} within {:.3g} s (or the link failed)", addr_.text, timeout.count()));
    std::string reply(buf.data(), static_cast<size_t>(n));
    if (reply.ends_with(addr_.eol)) reply.resize(reply.size() - addr_.eol.size());
    while (!reply.empty() && (reply.back() == '\n' || reply.back() == '\r')) reply.pop_back();
    return reply;
  }

  Status Reconnect() override {
    Close();
    return Open().WithContext("reconnecting");
  }

  std::string Address() const override { return addr_.text; }

 private:
  void Close() {
    if (id_ >= 0) lxi_disconnect(id_);
    id_ = -1;
  }

  kp::Address addr_;
  Seconds connect_timeout_;
  Seconds write_timeout_{5.0};
  int id_ = -1;
};

}  // namespace

Result<std::unique_ptr<Transport>> OpenVxi11Transport(const Address& address, Seconds connect_timeout) {
  if (address.kind != Address::Kind::kVxi11) return InvalidInput(fmt::format("address '{}' is not a vxi11 address", address.text));
  auto t = std::make_unique<Vxi11Transport>(address, connect_timeout);
  KP_RETURN_IF_ERROR(t->Open());
  return std::unique_ptr<Transport>(std::move(t));
}

}  // namespace kp
