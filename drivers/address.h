// Instrument addresses: one syntax everywhere (rig files, `probe`, `sim`).
//
//   tcp:HOST:PORT                       raw SCPI socket (instruments usually listen on 5025);
//                                       HOST is a name, an IPv4 address or an IPv6 literal in
//                                       brackets (tcp:[::1]:5025)
//   HOST:PORT                           the same without the prefix (a name or IPv4 address and a port)
//   serial:PATH[?KEY=VALUE&...]         serial port; keys (defaults in brackets):
//        baud=N [9600]  data=5..8 [8]  parity=none|odd|even [none]  stop=1|2 [1]
//        flow=none|rtscts|xonxoff [none]
//   /dev/PATH                           a bare device path: serial with the defaults (options may follow ?)
//   pty                                 `kneepoint sim` only: serve on new pseudo-terminals
//   usbtmc:/dev/usbtmcN                 a USB-TMC instrument through the Linux usbtmc driver
//                                       (a bare /dev/usbtmcN path means the same)
//   vxi11:HOST[:DEVICE]                 VXI-11 (ONC RPC) on a LAN instrument; DEVICE defaults to inst0
//   VISA-style resource strings (drivers/visa_address.h): TCPIP[n]::HOST::PORT::SOCKET,
//   TCPIP[n]::HOST[::DEVICE]::INSTR, ASRL/dev/PATH::INSTR, ASRLn::INSTR,
//   USB[n]::VID::PID::SERIAL[::INTERFACE]::INSTR (found among the usbtmc devices by sysfs)
//
// Every form also takes `eol=lf|crlf|cr` (line terminator sent and expected,
// [lf]); tcp takes it as `tcp:HOST:PORT?eol=crlf`. Paths under /dev/pts/ are opened with POSIX termios directly
// (libserialport cannot open pseudo-terminals).
#pragma once

#include <string>
#include <string_view>

#include "drivers/status.h"

namespace kp {

enum class Parity { kNone, kOdd, kEven };
enum class FlowControl { kNone, kRtsCts, kXonXoff };

struct SerialSettings {
  int baud = 9600;
  int data_bits = 8;
  Parity parity = Parity::kNone;
  int stop_bits = 1;
  FlowControl flow = FlowControl::kNone;
};

struct Address {
  enum class Kind { kTcp, kSerial, kPty, kUsbtmc, kVxi11 };
  Kind kind = Kind::kTcp;
  std::string host;      // tcp, vxi11
  int port = 0;          // tcp (0 only when listening: pick a free port)
  std::string path;      // serial; usbtmc (empty until a USB identity is found: ResolveUsbtmc)
  std::string vxi11_device = "inst0";  // vxi11: the logical device name on the instrument
  // usbtmc given by its USB identity (a VISA USB resource string); 0 / empty: not given.
  int usb_vid = 0, usb_pid = 0;
  std::string usb_serial;
  int usb_interface = -1;  // -1: any interface
  SerialSettings serial;  // serial
  std::string eol = "\n";
  std::string text;       // as written, for messages
};

// Parses an address; errors say which part is wrong and list the valid forms.
Result<Address> ParseAddress(std::string_view text);

// "tcp:HOST:PORT", with an IPv6 host in brackets.
std::string FormatTcpAddress(const std::string& host, int port);

// Name of a terminator for messages: "lf", "crlf", "cr".
std::string EolName(const std::string& eol);

}  // namespace kp
