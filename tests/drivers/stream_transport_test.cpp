// Stream transports against the simulator server over real loopback sockets
// and pseudo-terminals. Readings are deterministic: the server's bench and the
// test share one VirtualClock that only the test advances.
#include "drivers/stream_transport.h"

#include <gtest/gtest.h>

#include <fstream>
#include <iterator>

#include <sys/socket.h>
#include <netinet/in.h>
#include <arpa/inet.h>
#include <unistd.h>

#include "drivers/roles.h"
#include "drivers/scpi_session.h"
#include "drivers/scpi_trace.h"
#include "drivers/sim/sim_bench.h"
#include "drivers/sim/sim_server.h"
#include "tests/support/test_support.h"

namespace kp {
namespace {

struct Served {
  VirtualClock clock;
  sim::SimBench bench{sim::DemoLiIonCell(2.56), clock};
  std::unique_ptr<sim::SimServer> server;
  explicit Served(const char* listen, sim::FaultOptions faults = {}) {
    auto a = ParseAddress(listen);
    EXPECT_TRUE(a.ok());
    auto s = sim::SimServer::Start(*a, {{"load", &bench.load()}, {"meter", &bench.meter()}, {"thermometer", &bench.thermometer()}}, faults);
    EXPECT_TRUE(s.ok()) << s.status().ToString();
    server = std::move(*s);
  }
  std::unique_ptr<ScpiSession> Session(size_t device, ScpiOptions o = {}) {
    auto t = OpenTransport(server->client_addresses()[device]);
    EXPECT_TRUE(t.ok()) << t.status().ToString();
    return std::make_unique<ScpiSession>(std::move(*t), clock, o);
  }
};

void DriveLoad(Served& s) {
  auto load_s = s.Session(0);
  auto meter_s = s.Session(1);
  LoadDriver load(*load_s);
  MeterDriver meter(*meter_s);
  auto idn = load_s->Identify();
  ASSERT_TRUE(idn.ok()) << idn.status().ToString();
  EXPECT_EQ(*idn, "Kneepoint Simulation,KP-SIM-LOAD,SN0001,1.0");
  ASSERT_OK(load.SetLevel(LoadMode::kCurrent, 1.28));
  ASSERT_OK(load.SetInput(true));
  ASSERT_OK(load_s->WaitComplete());
  s.clock.Advance(Seconds(1800));
  auto i = load.MeasureCurrent();
  ASSERT_TRUE(i.ok());
  EXPECT_DOUBLE_EQ(*i, 1.28);
  // Half an hour at 0.5C took 640 mAh of 2560: state of charge 0.75, less the
  // cell's own self-discharge over that half hour (a few parts in 1e5).
  EXPECT_NEAR(s.bench.cell_soc(), 0.75, 1e-4);
  auto v = meter.MeasureVoltage();
  ASSERT_TRUE(v.ok());
  EXPECT_GT(*v, 3.0);
  EXPECT_LT(*v, 4.2);
  ASSERT_OK(load.SetInput(false));
  ASSERT_OK(load_s->WaitComplete());
  EXPECT_FALSE(s.bench.load_input_on());
}

TEST(StreamTransport, TcpLoopbackTalksToTheSimulator) {
  Served s("tcp:127.0.0.1:0");
  DriveLoad(s);
  EXPECT_GT(s.server->lines_handled(), 6);
}

TEST(StreamTransport, PtyTalksToTheSimulator) {
  Served s("pty");
  ASSERT_EQ(s.server->client_addresses()[0].rfind("serial:/dev/pts/", 0), 0u) << s.server->client_addresses()[0];
  DriveLoad(s);
}

TEST(StreamTransport, CrLfTerminator) {
  Served s("tcp:127.0.0.1:0?eol=crlf");
  EXPECT_NE(s.server->client_addresses()[2].find("?eol=crlf"), std::string::npos);
  auto t = s.Session(2);
  auto temp = ThermometerDriver(*t).MeasureTemperature();
  ASSERT_TRUE(temp.ok()) << temp.status().ToString();
  EXPECT_NEAR(*temp, sim::DemoLiIonCell().ambient_c, 1e-4);  // an idle cell sits at ambient
}

TEST(StreamTransport, RefusedConnectionIsAnIoError) {
  // Find a port nobody listens on: bind, read the port, close.
  int fd = ::socket(AF_INET, SOCK_STREAM, 0);
  sockaddr_in a{};
  a.sin_family = AF_INET;
  a.sin_addr.s_addr = htonl(INADDR_LOOPBACK);
  ASSERT_EQ(::bind(fd, reinterpret_cast<sockaddr*>(&a), sizeof a), 0);
  socklen_t len = sizeof a;
  ::getsockname(fd, reinterpret_cast<sockaddr*>(&a), &len);
  int port = ntohs(a.sin_port);
  ::close(fd);
  auto t = OpenTransport("tcp:127.0.0.1:" + std::to_string(port));
  ASSERT_FALSE(t.ok());
  EXPECT_EQ(t.status().code(), StatusCode::kIo);
  EXPECT_NE(t.status().message().find("refused"), std::string::npos) << t.status().message();
}

TEST(StreamTransport, SilentPeerTimesOut) {
  // A listener that accepts (the kernel does it) but never answers.
  int fd = ::socket(AF_INET, SOCK_STREAM, 0);
  sockaddr_in a{};
  a.sin_family = AF_INET;
  a.sin_addr.s_addr = htonl(INADDR_LOOPBACK);
  ASSERT_EQ(::bind(fd, reinterpret_cast<sockaddr*>(&a), sizeof a), 0);
  ASSERT_EQ(::listen(fd, 1), 0);
  socklen_t len = sizeof a;
  ::getsockname(fd, reinterpret_cast<sockaddr*>(&a), &len);
  auto t = OpenTransport("tcp:127.0.0.1:" + std::to_string(ntohs(a.sin_port)));
  ASSERT_TRUE(t.ok()) << t.status().ToString();
  VirtualClock clock;
  ScpiOptions o;
  o.timeout = Seconds(0.05);
  o.retries = 1;
  ScpiSession session(std::move(*t), clock, o);
  auto idn = session.Identify();
  ::close(fd);
  ASSERT_FALSE(idn.ok());
  EXPECT_EQ(idn.status().code(), StatusCode::kTimeout);
  EXPECT_EQ(session.retry_count(), 1);
}

TEST(StreamTransport, PseudoTerminalPathRefusedByLibserialportFallsBackWithANote) {
  Served s("pty");
  std::string note;
  StreamOptions so;
  so.note = [&](std::string_view m) { note = std::string(m); };
  auto t = OpenTransport(s.server->client_addresses()[1] + "?baud=115200", so);
  ASSERT_TRUE(t.ok()) << t.status().ToString();
  EXPECT_NE(note.find("POSIX termios"), std::string::npos) << note;
  auto missing = OpenTransport("serial:/dev/kneepoint-no-such-port");
  ASSERT_FALSE(missing.ok());
  EXPECT_EQ(missing.status().code(), StatusCode::kIo);
}

TEST(StreamTransport, DroppedLinkReconnectsAndTraceRecordsIt) {
  sim::FaultOptions f;
  f.disconnect_at = 2;
  Served s("tcp:127.0.0.1:0", f);
  testing::TempDir dir;
  auto hook = OpenTraceFile(dir.File("trace.log"));
  ASSERT_TRUE(hook.ok());
  auto session = s.Session(1);
  session->SetTrace(*hook);
  MeterDriver meter(*session);
  for (int i = 0; i < 4; ++i) {
    auto v = meter.MeasureVoltage();
    ASSERT_TRUE(v.ok()) << i << ": " << v.status().ToString();
  }
  EXPECT_EQ(session->retry_count(), 1);
  EXPECT_EQ(s.server->faults_injected(), 1);
  std::ifstream in(dir.File("trace.log"));
  std::string all((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>());
  EXPECT_NE(all.find("retry 1 of 'MEAS:VOLT:DC?'"), std::string::npos) << all;
  EXPECT_NE(all.find("link closed"), std::string::npos) << all;
  EXPECT_NE(all.find("t=0.000s"), std::string::npos) << all;
  EXPECT_NE(all.find("Z  t="), std::string::npos) << all;  // wall timestamp then run time
}

TEST(StreamTransport, ConfirmedWriteIsResentAfterADroppedLink) {
  sim::FaultOptions f;
  f.disconnect_at = 1;  // the *OPC? after the first command
  Served s("tcp:127.0.0.1:0", f);
  ScpiOptions o;
  o.confirm_writes = true;
  auto session = s.Session(0, o);
  LoadDriver load(*session);
  ASSERT_OK(load.SetLevel(LoadMode::kCurrent, 0.5));
  ASSERT_OK(load.SetInput(true));
  EXPECT_TRUE(s.bench.load_input_on());
  EXPECT_EQ(session->retry_count(), 1);
  ASSERT_OK(load.SetInput(false));
}

}  // namespace
}  // namespace kp
