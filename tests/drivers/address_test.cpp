#include "drivers/address.h"

#include <gtest/gtest.h>

namespace kp {
namespace {

TEST(Address, Tcp) {
  auto a = ParseAddress("tcp:127.0.0.1:5025");
  ASSERT_TRUE(a.ok()) << a.status().ToString();
  EXPECT_EQ(a->kind, Address::Kind::kTcp);
  EXPECT_EQ(a->host, "127.0.0.1");
  EXPECT_EQ(a->port, 5025);
  EXPECT_EQ(a->eol, "\n");
  auto b = ParseAddress("tcp:bench-load.lan:5025?eol=crlf");
  ASSERT_TRUE(b.ok());
  EXPECT_EQ(b->host, "bench-load.lan");
  EXPECT_EQ(b->eol, "\r\n");
}

TEST(Address, SerialWithEveryOption) {
  auto a = ParseAddress("serial:/dev/ttyUSB0?baud=115200&parity=even&data=7&stop=2&flow=rtscts&eol=cr");
  ASSERT_TRUE(a.ok()) << a.status().ToString();
  EXPECT_EQ(a->kind, Address::Kind::kSerial);
  EXPECT_EQ(a->path, "/dev/ttyUSB0");
  EXPECT_EQ(a->serial.baud, 115200);
  EXPECT_EQ(a->serial.parity, Parity::kEven);
  EXPECT_EQ(a->serial.data_bits, 7);
  EXPECT_EQ(a->serial.stop_bits, 2);
  EXPECT_EQ(a->serial.flow, FlowControl::kRtsCts);
  EXPECT_EQ(a->eol, "\r");
  auto d = ParseAddress("serial:/dev/pts/4");
  ASSERT_TRUE(d.ok());
  EXPECT_EQ(d->serial.baud, 9600);
  EXPECT_EQ(d->serial.parity, Parity::kNone);
  EXPECT_EQ(ParseAddress("pty")->kind, Address::Kind::kPty);
}

TEST(Address, ErrorsSayWhatIsWrong) {
  struct Case {
    const char* text;
    const char* says;
  } cases[] = {
      {"tcp:host", "expected tcp:HOST:PORT"},
      {"tcp:host:50x", "port '50x'"},
      {"tcp:host:70000", "0..65535"},
      {"usb:/dev/x", "expected tcp:HOST:PORT"},
      {"serial:", "device path"},
      {"serial:/dev/ttyS0?baud=fast", "baud 'fast'"},
      {"serial:/dev/ttyS0?parity=mark", "parity 'mark'"},
      {"serial:/dev/ttyS0?data=9", "5..8"},
      {"serial:/dev/ttyS0?stop=3", "stop must be 1 or 2"},
      {"serial:/dev/ttyS0?flow=dtr", "flow 'dtr'"},
      {"serial:/dev/ttyS0?speed=9600", "unknown option 'speed'"},
      {"serial:/dev/ttyS0?baud", "KEY=VALUE"},
      {"tcp:h:1?baud=9600", "serial ports only"},
      {"tcp:h:1?eol=nl", "eol 'nl'"},
  };
  for (const Case& c : cases) {
    auto a = ParseAddress(c.text);
    ASSERT_FALSE(a.ok()) << c.text;
    EXPECT_EQ(a.status().code(), StatusCode::kInvalidInput);
    EXPECT_NE(a.status().message().find(c.says), std::string::npos) << c.text << " -> " << a.status().message();
    EXPECT_NE(a.status().message().find(c.text), std::string::npos) << "message should quote the address";
  }
}

}  // namespace
}  // namespace kp
