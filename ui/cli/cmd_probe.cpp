// `probe ADDRESS`: open one instrument, ask *IDN?, print the answer.
#include <iostream>

#include <fmt/format.h>

#include "drivers/scpi_session.h"
#include "drivers/scpi_trace.h"
#include "drivers/stream_transport.h"
#include "drivers/text_hygiene.h"
#include "ui/cli/cli.h"

namespace kp::cli {
namespace {

struct ProbeOptions {
  std::string address;
  double timeout_s = 2.0;
  std::string trace;
};

int RunProbe(const ProbeOptions& o) {
  StreamOptions so;
  so.connect_timeout = Seconds(o.timeout_s);
  so.note = [](std::string_view m) { std::cerr << "kneepoint: " << m << "\n"; };
  auto t = OpenTransport(o.address, so);
  if (!t.ok()) return Fail(t.status().WithContext("probe"));
  SteadyClock clock;
  ScpiOptions opts;
  opts.timeout = Seconds(o.timeout_s);
  opts.retries = 0;
  ScpiSession session(std::move(*t), clock, opts);
  if (!o.trace.empty()) {
    auto hook = OpenTraceFile(o.trace);
    if (!hook.ok()) return Fail(hook.status());
    session.SetTrace(*hook);
  }
  auto idn = session.Identify();
  if (!idn.ok()) return Fail(idn.status().WithContext("probe: *IDN?"));
  std::cout << TerminalSafe(fmt::format("{}  {}\n", o.address, *idn));
  return kExitOk;
}

}  // namespace

void RegisterProbe(CliRegistry& r) {
  static ProbeOptions opt;
  CLI::App* c = r.Add("probe", "Ask one instrument *IDN? (tcp:HOST:PORT, serial:PATH?baud=..., usbtmc:/dev/usbtmcN, vxi11:HOST, a VISA resource string or a device path)", [] { return RunProbe(opt); });
  c->add_option("address", opt.address, "Instrument address: tcp:HOST:PORT, HOST:PORT, tcp:[IPv6]:PORT, serial:PATH?baud=N..., usbtmc:/dev/usbtmcN, vxi11:HOST[:DEVICE], a VISA resource string (TCPIP0::HOST::5025::SOCKET, TCPIP0::HOST::INSTR, ASRL/dev/ttyUSB0::INSTR, USB0::VID::PID::SERIAL::INSTR), or a device path such as /dev/ttyUSB0 (serial, 9600 8N1)")->required();
  AddQuantityOption(c, "--timeout", opt.timeout_s, Dimension::kTime, "How long to wait for the connection and the reply", 1e-3,
                    600.0);
  c->add_option("--trace", opt.trace, "Append the SCPI exchange to this file");
}

}  // namespace kp::cli
