// Strict reply framing: one command, one complete reply. Instruments that
// answer twice, answer late or send lines nobody asked for must never have
// such a line taken as the reply to a later query.
#include <gtest/gtest.h>

#include "drivers/inproc_transport.h"
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

}  // namespace
}  // namespace kp
