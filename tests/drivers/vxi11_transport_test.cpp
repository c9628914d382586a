// The VXI-11 transport (liblxi) against an in-test VXI-11 instrument: a
// portmapper and DEVICE_CORE served by tests/support/vxi11_peer.h with the
// simulated load behind it. liblxi asks the portmapper on port 111, so the
// exchange runs in a child process with a network namespace of its own; where
// the system allows none the test is skipped (and says so).
#include "drivers/vxi11_transport.h"

#include <gtest/gtest.h>

#include <fmt/format.h>

#include "drivers/roles.h"
#include "drivers/scpi_session.h"
#include "drivers/sim/sim_bench.h"
#include "drivers/stream_transport.h"
#include "tests/support/vxi11_peer.h"

namespace kp {
namespace {

std::string Exchange() {
  VirtualClock clock;
  sim::SimBench bench(sim::DemoLiIonCell(2.56), clock);
  auto peer = testing::Vxi11Peer::Start(bench.load(), 111);
  if (!peer.ok()) return peer.status().ToString();
  StreamOptions so;
  so.connect_timeout = Seconds(2.0);
  auto t = OpenTransport("TCPIP0::127.0.0.1::inst0::INSTR", so);
  if (!t.ok()) return "open: " + t.status().ToString();
  // Nothing asked yet: the instrument has nothing to say, a timeout.
  Result<std::string> none = (*t)->ReadLine(Seconds(0.2));
  if (none.ok() || none.status().code() != StatusCode::kTimeout) return "an unasked read should time out";
  ScpiOptions o;
  o.timeout = Seconds(1.0);
  ScpiSession s(std::move(*t), clock, o);
  Result<std::string> idn = s.Identify();
  if (!idn.ok()) return "*IDN?: " + idn.status().ToString();
  if (*idn != "Kneepoint Simulation,KP-SIM-LOAD,SN0001,1.0") return "*IDN? answered '" + *idn + "'";
  LoadDriver load(s);
  if (Status st = load.SetLevel(LoadMode::kCurrent, 1.5); !st.ok()) return st.ToString();
  if (Status st = load.SetInput(true); !st.ok()) return st.ToString();
  Result<double> i = load.MeasureCurrent();
  if (!i.ok()) return i.status().ToString();
  if (*i != 1.5) return fmt::format("current read {} A, not 1.5", *i);
  if (!bench.load_input_on()) return "the input did not go on";
  if (Status st = load.SetInput(false); !st.ok()) return st.ToString();
  if ((*peer)->links() != std::vector<std::string>{"inst0"}) return "create_link was not asked for inst0 once";
  return "";
}

TEST(Vxi11Transport, LiblxiTalksToAVxi11InstrumentThroughThePortmapper) {
  std::optional<std::string> outcome = testing::RunInPrivateNetwork(Exchange);
  if (!outcome) GTEST_SKIP() << "no network namespace of our own here (port 111 is needed for the portmapper)";
  EXPECT_EQ(*outcome, "");
}

// Nobody at the address: a link error naming it, within the connect timeout
// (the portmapper is tried first on TCP port 111, bounded by that timeout;
// the RPC library's own lookup once waited for minutes here).
TEST(Vxi11Transport, NoInstrumentIsALinkErrorNamingTheAddress) {
  std::optional<std::string> outcome = testing::RunInPrivateNetwork([]() -> std::string {
    StreamOptions so;
    so.connect_timeout = Seconds(0.5);
    auto t = OpenTransport("vxi11:127.0.0.1:inst3", so);
    if (t.ok()) return "opened with nobody listening";
    if (t.status().code() != StatusCode::kIo) return "not a link error: " + t.status().ToString();
    if (t.status().message().find("vxi11:127.0.0.1:inst3") == std::string::npos) return "no address in: " + t.status().message();
    return "";
  });
  if (!outcome) GTEST_SKIP() << "no network namespace of our own here";
  EXPECT_EQ(*outcome, "");
}

}  // namespace
}  // namespace kp
