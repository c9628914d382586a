// Strict reply framing: one command, one complete reply. Instruments that
// answer twice, answer late or send lines nobody asked for must never have
// such a line taken as the reply to a later query.
#include <gtest/gtest.h>

#include <arpa/inet.h>
#include <netinet/in.h>
#include <sys/socket.h>
#include <unistd.h>

#include <chrono>
#include <thread>

#include "drivers/address.h"
#include "drivers/inproc_transport.h"
#include "drivers/stream_transport.h"
#include "drivers/scpi_session.h"
#include "tests/support/hostile_device.h"
#include "tests/support/test_support.h"

namespace kp {
namespace {

// Answers "ECHO? x" with "x", "*OPC?" with "1", and "NOISE" (a command) with
// a line nobody asked for; ignores everything else.
class EchoDevice final : public LineDevice {
 public:
  std::optional<std::string> HandleLine(std::string_view line) override {
    if (line.rfind("ECHO? ", 0) == 0) return std::string(line.substr(6));
    if (line == "*OPC?") return std::string("1");
    if (line == "NOISE") return std::string("junk");
    return std::nullopt;
  }
};

struct Link {
  explicit Link(bool strict = true) {
    ScpiOptions o;
    o.strict_framing = strict;
    session = std::make_unique<ScpiSession>(std::make_unique<InProcTransport>(hostile, clock), clock, o);
  }
  VirtualClock clock;
  EchoDevice echo;
  testing::HostileDevice hostile{echo};
  std::unique_ptr<ScpiSession> session;

  // Every reply must belong to its own query.
  void ExpectAligned(int n) {
    for (int i = 1; i <= n; ++i) {
      Result<std::string> r = session->Query("ECHO? " + std::to_string(i));
      ASSERT_TRUE(r.ok()) << r.status().ToString();
      EXPECT_EQ(*r, std::to_string(i));
    }
  }
};

TEST(ScpiFraming, AnInstrumentThatAnswersTwiceIsResynchronisedNotShifted) {
  Link l;
  l.hostile.twice_at = 2;
  l.ExpectAligned(6);
  EXPECT_GE(l.session->resync_count(), 1);
}

// The same instrument without strict framing shifts every later reply by one:
// what the check above guards against.
TEST(ScpiFraming, WithoutStrictFramingADuplicateShiftsLaterReplies) {
  Link l(/*strict=*/false);
  l.hostile.twice_at = 2;
  ASSERT_EQ(*l.session->Query("ECHO? 1"), "1");
  ASSERT_EQ(*l.session->Query("ECHO? 2"), "2");
  EXPECT_EQ(*l.session->Query("ECHO? 3"), "2");
}

TEST(ScpiFraming, ALateReplyIsDiscardedNeverTakenAsTheNextReading) {
  Link l;
  l.hostile.late_at = 3;
  l.ExpectAligned(6);
  EXPECT_GE(l.session->resync_count(), 1);
}

TEST(ScpiFraming, AnInstrumentThatAlwaysAnswersTwiceFailsInsteadOfAnsweringWrong) {
  Link l;
  l.hostile.twice_always = true;
  Result<std::string> r = l.session->Query("ECHO? 7");
  ASSERT_FALSE(r.ok());
  EXPECT_NE(r.status().message().find("more than one line"), std::string::npos) << r.status().ToString();
}

TEST(ScpiFraming, UnaskedInputBeforeAQueryIsDroppedByAResync) {
  Link l;
  ASSERT_OK(l.session->Write("NOISE"));
  Result<std::string> r = l.session->Query("ECHO? 5");
  ASSERT_TRUE(r.ok()) << r.status().ToString();
  EXPECT_EQ(*r, "5");
  EXPECT_EQ(l.session->resync_count(), 1);
}

// A raw TCP instrument that answers "ECHO? x" with "x#n" (n counts the
// queries), the second one late and in two fragments; *OPC? with 1.
class LateFragmentsServer {
 public:
  LateFragmentsServer() {
    listen_fd_ = socket(AF_INET, SOCK_STREAM, 0);
    sockaddr_in a{};
    a.sin_family = AF_INET;
    a.sin_addr.s_addr = htonl(INADDR_LOOPBACK);
    bind(listen_fd_, reinterpret_cast<sockaddr*>(&a), sizeof a);
    listen(listen_fd_, 1);
    socklen_t len = sizeof a;
    getsockname(listen_fd_, reinterpret_cast<sockaddr*>(&a), &len);
    port_ = ntohs(a.sin_port);
    thread_ = std::thread([this] { Serve(); });
  }
  ~LateFragmentsServer() {
    thread_.join();
    close(listen_fd_);
  }
  int port() const { return port_; }

 private:
  void Serve() {
    int fd = accept(listen_fd_, nullptr, nullptr);
    if (fd < 0) return;
    std::string buf;
    int n = 0;
    char c;
    while (read(fd, &c, 1) == 1) {
      if (c != '\n') {
        buf += c;
        continue;
      }
      std::string line = buf;
      buf.clear();
      auto send = [&](const std::string& s) { (void)!write(fd, s.data(), s.size()); };
      if (line == "*OPC?") send("1\n");
      if (line.rfind("ECHO? ", 0) != 0) continue;
      ++n;
      std::string reply = line.substr(6) + "#" + std::to_string(n);
      if (n == 2) {
        std::this_thread::sleep_for(std::chrono::milliseconds(750));  // after the 0.5 s timeout
        send(reply.substr(0, 1));
        std::this_thread::sleep_for(std::chrono::milliseconds(20));
        send(reply.substr(1) + "\n");
      } else {
        send(reply + "\n");
      }
    }
    close(fd);
  }
  int listen_fd_ = -1;
  int port_ = 0;
  std::thread thread_;
};

// Over a real socket: the late reply, arriving in fragments after the
// timeout, is dropped by the resync and never answers a later query.
TEST(ScpiFraming, ALateFragmentedReplyOverTcpIsNeverTakenForALaterOne) {
  LateFragmentsServer server;
  auto addr = ParseAddress("tcp:127.0.0.1:" + std::to_string(server.port()));
  ASSERT_TRUE(addr.ok());
  auto t = OpenTransport(*addr);
  ASSERT_TRUE(t.ok()) << t.status().ToString();
  VirtualClock clock;
  ScpiOptions o;
  o.timeout = Seconds(0.5);
  o.late_reply = Seconds(0.5);  // as rig files set it
  ScpiSession session(std::move(*t), clock, o);
  for (int i = 1; i <= 4; ++i) {
    Result<std::string> r = session.Query("ECHO? q" + std::to_string(i));
    ASSERT_TRUE(r.ok()) << r.status().ToString();
    EXPECT_EQ(r->substr(0, r->find('#')), "q" + std::to_string(i)) << *r;
  }
  EXPECT_GE(session.resync_count(), 1);
}

}  // namespace
}  // namespace kp
