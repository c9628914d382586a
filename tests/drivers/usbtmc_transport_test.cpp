// The usbtmc transport against a fake device: one end of a SOCK_SEQPACKET
// socket pair handed in through the opener, which keeps message boundaries as
// the usbtmc driver does (one write = one message, one read = one reply). The
// peer thread answers with the simulator's load, so the session's timeouts,
// retries and trace run over the same code real instruments use.
#include "drivers/usbtmc_transport.h"

#include <gtest/gtest.h>

#include <algorithm>
#include <atomic>
#include <mutex>
#include <thread>
#include <vector>

#include <poll.h>
#include <sys/socket.h>
#include <unistd.h>

#include "drivers/roles.h"
#include "drivers/scpi_session.h"
#include "drivers/sim/sim_bench.h"
#include "drivers/stream_transport.h"
#include "tests/support/fake_usbtmc.h"
#include "tests/support/test_support.h"

namespace kp {
namespace {

using testing::FakeUsbtmcPeer;

struct UsbtmcBench {
  VirtualClock clock;
  sim::SimBench bench{sim::DemoLiIonCell(2.56), clock};
  FakeUsbtmcPeer peer{bench.load()};
  Result<std::unique_ptr<Transport>> Open(const std::string& address) {
    StreamOptions so;
    so.usbtmc.open = peer.Opener();
    return OpenTransport(address, so);
  }
};

TEST(UsbtmcTransport, OneWriteIsOneMessageAndOneReadOneReply) {
  UsbtmcBench b;
  auto t = b.Open("usbtmc:/dev/usbtmc0");
  ASSERT_TRUE(t.ok()) << t.status().ToString();
  EXPECT_EQ((*t)->Address(), "usbtmc:/dev/usbtmc0");
  ScpiOptions o;
  o.timeout = Seconds(0.5);
  ScpiSession s(std::move(*t), b.clock, o);
  std::vector<std::string> trace;
  s.SetTrace([&](Seconds, char dir, const std::string&, std::string_view text) { trace.push_back(std::string(1, dir) + std::string(text)); });
  auto idn = s.Identify();
  ASSERT_TRUE(idn.ok()) << idn.status().ToString();
  EXPECT_EQ(*idn, "Kneepoint Simulation,KP-SIM-LOAD,SN0001,1.0") << "terminator stripped";
  LoadDriver load(s);
  ASSERT_OK(load.SetLevel(LoadMode::kCurrent, 1.5));
  ASSERT_OK(load.SetInput(true));
  auto i = load.MeasureCurrent();
  ASSERT_TRUE(i.ok()) << i.status().ToString();
  EXPECT_DOUBLE_EQ(*i, 1.5);
  EXPECT_TRUE(b.bench.load_input_on());
  std::vector<std::string> m = b.peer.messages();
  ASSERT_GE(m.size(), 5u);
  EXPECT_EQ(m[0], "*IDN?\n");
  EXPECT_EQ(m[1], "FUNC CURR\n");
  EXPECT_EQ(m[2].substr(0, 5), "CURR ");
  EXPECT_EQ(m[2].back(), '\n');
  EXPECT_EQ(std::count(m[2].begin(), m[2].end(), '\n'), 1) << "one command per message";
  EXPECT_EQ(m[3], "INP ON\n");
  ASSERT_GE(trace.size(), 2u);
  EXPECT_EQ(trace[0], ">*IDN?");
  EXPECT_EQ(trace[1], "<Kneepoint Simulation,KP-SIM-LOAD,SN0001,1.0");
  EXPECT_EQ(b.peer.opened_paths(), std::vector<std::string>{"/dev/usbtmc0"});
}

TEST(UsbtmcTransport, AMissingReplyTimesOutAndTheSessionRetries) {
  UsbtmcBench b;
  auto t = b.Open("/dev/usbtmc2");  // a bare usbtmc path is a usbtmc address
  ASSERT_TRUE(t.ok()) << t.status().ToString();
  auto bare = (*t)->ReadLine(Seconds(0.05));
  ASSERT_FALSE(bare.ok());
  EXPECT_EQ(bare.status().code(), StatusCode::kTimeout);
  EXPECT_NE(bare.status().message().find("/dev/usbtmc2"), std::string::npos);
  ScpiOptions o;
  o.timeout = Seconds(0.1);
  o.retries = 2;
  ScpiSession s(std::move(*t), b.clock, o);
  b.peer.drop_next_replies = 1;
  auto idn = s.Identify();
  ASSERT_TRUE(idn.ok()) << idn.status().ToString();
  EXPECT_EQ(*idn, "Kneepoint Simulation,KP-SIM-LOAD,SN0001,1.0");
  EXPECT_GE(s.retry_count(), 1);
}

TEST(UsbtmcTransport, AClosedDeviceIsALinkErrorAndReconnectOpensItAgain) {
  UsbtmcBench b;
  auto t = b.Open("usbtmc:/dev/usbtmc0");
  ASSERT_TRUE(t.ok()) << t.status().ToString();
  ScpiOptions o;
  o.timeout = Seconds(0.5);
  o.retries = 2;
  ScpiSession s(std::move(*t), b.clock, o);
  b.peer.hang_up_next = true;  // an unplugged instrument
  auto idn = s.Identify();
  ASSERT_TRUE(idn.ok()) << "reconnected and asked again: " << idn.status().ToString();
  EXPECT_EQ(b.peer.opened_paths().size(), 2u);
}

TEST(UsbtmcTransport, OpenFailuresNameThePath) {
  auto t = OpenTransport("usbtmc:/dev/kneepoint-no-such-usbtmc");
  ASSERT_FALSE(t.ok());
  EXPECT_EQ(t.status().code(), StatusCode::kIo);
  EXPECT_NE(t.status().message().find("/dev/kneepoint-no-such-usbtmc"), std::string::npos) << t.status().message();
  EXPECT_NE(t.status().message().find("plugged in"), std::string::npos) << t.status().message();
}

}  // namespace
}  // namespace kp
