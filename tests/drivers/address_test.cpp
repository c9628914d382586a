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
      {"tcp:::1:5025", "IPv6 address goes in brackets, as in tcp:[::1]:5025"},
      {"tcp:[::1:5025", "closing ']'"},
      {"tcp:[::1]5025", "expected ':PORT' after ']'"},
      {"tcp:[]:5025", "empty host"},
      {"ttyUSB0", "bare device path such as /dev/ttyUSB0"},
      {"bench-load:fast", "expected tcp:HOST:PORT"},
  };
  for (const Case& c : cases) {
    auto a = ParseAddress(c.text);
    ASSERT_FALSE(a.ok()) << c.text;
    EXPECT_EQ(a.status().code(), StatusCode::kInvalidInput);
    EXPECT_NE(a.status().message().find(c.says), std::string::npos) << c.text << " -> " << a.status().message();
    EXPECT_NE(a.status().message().find(c.text), std::string::npos) << "message should quote the address";
  }
}

// What people type without the prefixes: a device path is a serial port with
// the defaults, HOST:PORT is TCP, IPv6 literals go in brackets.
TEST(Address, ShortFormsAndIpv6) {
  struct Case {
    const char* text;
    Address::Kind kind;
    const char* host_or_path;
    int port;
  } cases[] = {
      {"/dev/ttyUSB0", Address::Kind::kSerial, "/dev/ttyUSB0", 0},
      {"/dev/serial/by-id/usb-Bench_Load_1234-if00-port0", Address::Kind::kSerial,
       "/dev/serial/by-id/usb-Bench_Load_1234-if00-port0", 0},
      {"192.168.1.50:5025", Address::Kind::kTcp, "192.168.1.50", 5025},
      {"bench-load.lan:5025", Address::Kind::kTcp, "bench-load.lan", 5025},
      {"tcp:[::1]:5025", Address::Kind::kTcp, "::1", 5025},
      {"[fe80::1%eth0]:5025", Address::Kind::kTcp, "fe80::1%eth0", 5025},
      {"tcp:[2001:db8::7]:5025?eol=crlf", Address::Kind::kTcp, "2001:db8::7", 5025},
  };
  for (const Case& c : cases) {
    auto a = ParseAddress(c.text);
    ASSERT_TRUE(a.ok()) << c.text << ": " << a.status().ToString();
    EXPECT_EQ(a->kind, c.kind) << c.text;
    if (c.kind == Address::Kind::kSerial) {
      EXPECT_EQ(a->path, c.host_or_path);
      EXPECT_EQ(a->serial.baud, 9600) << "a bare path takes the default settings";
      EXPECT_EQ(a->serial.parity, Parity::kNone);
    } else {
      EXPECT_EQ(a->host, c.host_or_path) << c.text;
      EXPECT_EQ(a->port, c.port) << c.text;
    }
  }
  auto opts = ParseAddress("/dev/ttyUSB0?baud=115200");
  ASSERT_TRUE(opts.ok());
  EXPECT_EQ(opts->serial.baud, 115200);
  EXPECT_EQ(FormatTcpAddress("::1", 5025), "tcp:[::1]:5025");
  EXPECT_EQ(FormatTcpAddress("127.0.0.1", 5025), "tcp:127.0.0.1:5025");
  auto back = ParseAddress(FormatTcpAddress("::1", 6000));
  ASSERT_TRUE(back.ok());
  EXPECT_EQ(back->host, "::1");
}

}  // namespace
}  // namespace kp
