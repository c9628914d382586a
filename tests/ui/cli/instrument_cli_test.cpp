// `kneepoint probe` against the simulator server and against links that fail.
#include <arpa/inet.h>
#include <netinet/in.h>
#include <sys/socket.h>
#include <unistd.h>

#include <gtest/gtest.h>

#include <string>
#include <vector>

#include "drivers/sim/sim_bench.h"
#include "drivers/sim/sim_server.h"
#include "tests/support/fixtures.h"
#include "ui/cli/cli.h"

namespace kp {
namespace {

int Cli(std::vector<std::string> args) { return testing::RunKneepoint(std::move(args)); }

// A loopback listener that accepts connections (the kernel does) and never answers.
struct SilentListener {
  int fd = ::socket(AF_INET, SOCK_STREAM, 0);
  int port = 0;
  SilentListener() {
    sockaddr_in a{};
    a.sin_family = AF_INET;
    a.sin_addr.s_addr = htonl(INADDR_LOOPBACK);
    EXPECT_EQ(::bind(fd, reinterpret_cast<sockaddr*>(&a), sizeof a), 0);
    EXPECT_EQ(::listen(fd, 1), 0);
    socklen_t len = sizeof a;
    ::getsockname(fd, reinterpret_cast<sockaddr*>(&a), &len);
    port = ntohs(a.sin_port);
  }
  ~SilentListener() { ::close(fd); }
};

TEST(ProbeCommand, AnswersTimesOutAndRefuses) {
  VirtualClock clock;
  sim::SimBench bench(sim::DemoLiIonCell(2.56), clock);
  auto server = sim::SimServer::Start(*ParseAddress("tcp:127.0.0.1:0"), {{"load", &bench.load()}});
  ASSERT_TRUE(server.ok());
  std::string addr = (*server)->client_addresses()[0];
  EXPECT_EQ(Cli({"probe", addr}), cli::kExitOk);
  EXPECT_EQ((*server)->lines_handled(), 1);  // just *IDN?

  SilentListener silent;
  EXPECT_EQ(Cli({"probe", "tcp:127.0.0.1:" + std::to_string(silent.port), "--timeout", "50ms"}), cli::kExitFailure);

  int closed_port = 0;
  {
    SilentListener gone;
    closed_port = gone.port;
  }
  EXPECT_EQ(Cli({"probe", "tcp:127.0.0.1:" + std::to_string(closed_port)}), cli::kExitFailure);
  EXPECT_EQ(Cli({"probe", "tcp:127.0.0.1"}), cli::kExitBadInput);
  EXPECT_EQ(Cli({"probe", "pty"}), cli::kExitBadInput);
}

}  // namespace
}  // namespace kp
