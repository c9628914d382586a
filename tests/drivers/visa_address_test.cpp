// Addresses as instrument manuals print them (VISA resource strings) and the
// new native forms (usbtmc:, vxi11:), accepted and refused.
#include <gtest/gtest.h>

#include "drivers/address.h"
#include "drivers/visa_address.h"

namespace kp {
namespace {

struct Accepted {
  const char* text;
  Address::Kind kind;
  const char* host_or_path;  // host (tcp, vxi11) or path (serial, usbtmc by path)
  int port;                  // tcp
  const char* device;        // vxi11
};

TEST(VisaAddress, AcceptedForms) {
  const Accepted cases[] = {
      {"TCPIP::192.0.2.7::5025::SOCKET", Address::Kind::kTcp, "192.0.2.7", 5025, ""},
      {"TCPIP0::bench-load.lan::5025::SOCKET", Address::Kind::kTcp, "bench-load.lan", 5025, ""},
      {"tcpip0::192.0.2.7::5025::socket", Address::Kind::kTcp, "192.0.2.7", 5025, ""},
      {"TCPIP0::[2001:db8::7]::5025::SOCKET", Address::Kind::kTcp, "2001:db8::7", 5025, ""},
      {"TCPIP::192.0.2.7::INSTR", Address::Kind::kVxi11, "192.0.2.7", 0, "inst0"},
      {"TCPIP0::192.0.2.7", Address::Kind::kVxi11, "192.0.2.7", 0, "inst0"},
      {"TCPIP1::192.0.2.7::inst1::INSTR", Address::Kind::kVxi11, "192.0.2.7", 0, "inst1"},
      {"TCPIP0::192.0.2.9::gpib0,5::INSTR", Address::Kind::kVxi11, "192.0.2.9", 0, "gpib0,5"},
      {"TCPIP0::[fe80::1]::INSTR", Address::Kind::kVxi11, "fe80::1", 0, "inst0"},
      {"vxi11:192.0.2.7", Address::Kind::kVxi11, "192.0.2.7", 0, "inst0"},
      {"vxi11:scope.lan:inst2", Address::Kind::kVxi11, "scope.lan", 0, "inst2"},
      {"vxi11:[2001:db8::7]:inst0", Address::Kind::kVxi11, "2001:db8::7", 0, "inst0"},
      {"ASRL/dev/ttyUSB0::INSTR", Address::Kind::kSerial, "/dev/ttyUSB0", 0, ""},
      {"asrl/dev/serial/by-id/usb-Bench_1-if00-port0::instr", Address::Kind::kSerial,
       "/dev/serial/by-id/usb-Bench_1-if00-port0", 0, ""},
      {"ASRL1::INSTR", Address::Kind::kSerial, "/dev/ttyS0", 0, ""},
      {"ASRL3::INSTR", Address::Kind::kSerial, "/dev/ttyS2", 0, ""},
      {"usbtmc:/dev/usbtmc0", Address::Kind::kUsbtmc, "/dev/usbtmc0", 0, ""},
      {"/dev/usbtmc3", Address::Kind::kUsbtmc, "/dev/usbtmc3", 0, ""},
  };
  for (const Accepted& c : cases) {
    Result<Address> a = ParseAddress(c.text);
    ASSERT_TRUE(a.ok()) << c.text << ": " << a.status().ToString();
    EXPECT_EQ(a->kind, c.kind) << c.text;
    EXPECT_EQ(a->text, c.text);
    switch (c.kind) {
      case Address::Kind::kTcp:
        EXPECT_EQ(a->host, c.host_or_path) << c.text;
        EXPECT_EQ(a->port, c.port) << c.text;
        break;
      case Address::Kind::kVxi11:
        EXPECT_EQ(a->host, c.host_or_path) << c.text;
        EXPECT_EQ(a->vxi11_device, c.device) << c.text;
        break;
      default:
        EXPECT_EQ(a->path, c.host_or_path) << c.text;
    }
  }
}

TEST(VisaAddress, UsbResourceKeepsTheIdentityForSysfs) {
  Result<Address> a = ParseAddress("USB0::0x1AB1::0x0E11::DP8B000123::INSTR");
  ASSERT_TRUE(a.ok()) << a.status().ToString();
  EXPECT_EQ(a->kind, Address::Kind::kUsbtmc);
  EXPECT_EQ(a->usb_vid, 0x1AB1);
  EXPECT_EQ(a->usb_pid, 0x0E11);
  EXPECT_EQ(a->usb_serial, "DP8B000123");
  EXPECT_EQ(a->usb_interface, -1);
  EXPECT_TRUE(a->path.empty()) << "found among the usbtmc devices when opened";

  Result<Address> b = ParseAddress("usb::2391::1031::MY5400123::0::instr");  // decimal ids, interface 0
  ASSERT_TRUE(b.ok()) << b.status().ToString();
  EXPECT_EQ(b->usb_vid, 2391);
  EXPECT_EQ(b->usb_pid, 1031);
  EXPECT_EQ(b->usb_interface, 0);

  Result<Address> c = ParseAddress("USB0::0x05E6::0x2450::04412345");  // ::INSTR left out
  ASSERT_TRUE(c.ok()) << c.status().ToString();
  EXPECT_EQ(c->usb_serial, "04412345");
}

TEST(VisaAddress, TerminatorAndSerialOptionsStillFollowAQuestionMark) {
  Result<Address> a = ParseAddress("ASRL/dev/ttyUSB0::INSTR?baud=115200&eol=crlf");
  ASSERT_TRUE(a.ok()) << a.status().ToString();
  EXPECT_EQ(a->serial.baud, 115200);
  EXPECT_EQ(a->eol, "\r\n");
  Result<Address> b = ParseAddress("TCPIP0::192.0.2.7::INSTR?eol=cr");
  ASSERT_TRUE(b.ok()) << b.status().ToString();
  EXPECT_EQ(b->eol, "\r");
  Result<Address> c = ParseAddress("usbtmc:/dev/usbtmc1?baud=9600");
  ASSERT_FALSE(c.ok());
  EXPECT_NE(c.status().message().find("serial ports only"), std::string::npos) << c.status().message();
}

TEST(VisaAddress, RefusedFormsSayWhatIsWrong) {
  struct Case {
    const char* text;
    const char* says;
  } cases[] = {
      {"TCPIP0::192.0.2.7::hislip0::INSTR", "HiSLIP is not supported"},
      {"TCPIP0::192.0.2.7::5025::INSTR", "looks like a port: a raw socket is TCPIP0::HOST::5025::SOCKET"},
      {"TCPIP0::192.0.2.7::SOCKET", "TCPIP[n]::HOST::PORT::SOCKET"},
      {"TCPIP0::192.0.2.7::70000::SOCKET", "1..65535"},
      {"TCPIP0::192.0.2.7::50x::SOCKET", "port '50x'"},
      {"TCPIPX::192.0.2.7::INSTR", "not TCPIP or TCPIPn"},
      {"TCPIP0::::INSTR", "host is empty"},
      {"TCPIP0::2001:db8::7::INSTR", "IPv6"},
      {"TCPIP0::h::inst0::extra::INSTR", "too many parts"},
      {"GPIB0::5::INSTR", "'GPIB' resources are not supported"},
      {"USB0::0x1AB1::0x0E11::INSTR", "USB[n]::VID::PID::SERIAL"},
      {"USB0::0x1AB1X::0x0E11::SN1::INSTR", "vendor id '0x1AB1X'"},
      {"USB0::0x1AB1::70000::SN1::INSTR", "product id '70000'"},
      {"USB0::0x1AB1::0x0E11::SN1::if0::INSTR", "interface 'if0'"},
      {"USB0::0x1AB1::0x0E11::SN1::RAW", "::RAW resources are not supported"},
      {"ASRL::INSTR", "port number"},
      {"ASRL0::INSTR", "ASRL1"},
      {"ASRL/dev/ttyUSB0::SOCKET", "ASRL/dev/PATH::INSTR"},
      {"serial:/dev/usbtmc0", "write usbtmc:/dev/usbtmc0"},
      {"usbtmc:", "usbtmc:/dev/usbtmc0"},
      {"usbtmc:usbtmc0", "device path"},
      {"vxi11:", "needs a host"},
      {"vxi11:192.0.2.7:", "empty device name"},
      {"vxi11:192.0.2.7:111", "looks like a port"},
      {"vxi11:2001:db8::7", "IPv6 host goes in brackets"},
  };
  for (const Case& c : cases) {
    Result<Address> a = ParseAddress(c.text);
    ASSERT_FALSE(a.ok()) << c.text << " was accepted";
    EXPECT_EQ(a.status().code(), StatusCode::kInvalidInput) << c.text;
    EXPECT_NE(a.status().message().find(c.says), std::string::npos) << c.text << " -> " << a.status().message();
    EXPECT_NE(a.status().message().find(c.text), std::string::npos) << "message should quote the address: " << a.status().message();
  }
}

TEST(VisaAddress, OnlyVisaLookingTextGoesToTheVisaReader) {
  EXPECT_TRUE(LooksLikeVisaResource("TCPIP0::h::INSTR"));
  EXPECT_TRUE(LooksLikeVisaResource("usb::1::2::3"));
  EXPECT_TRUE(LooksLikeVisaResource("ASRL/dev/ttyS0"));
  EXPECT_FALSE(LooksLikeVisaResource("tcp:host:5025"));
  EXPECT_FALSE(LooksLikeVisaResource("usbhost:5025"));
  EXPECT_FALSE(LooksLikeVisaResource("[::1]:5025"));
  // Today's forms are unchanged.
  Result<Address> a = ParseAddress("usb-load.lan:5025");
  ASSERT_TRUE(a.ok()) << a.status().ToString();
  EXPECT_EQ(a->kind, Address::Kind::kTcp);
}

}  // namespace
}  // namespace kp
