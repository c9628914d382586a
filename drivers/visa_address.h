// VISA-style resource strings, as instrument manuals print them, read into
// the same Address the project's own syntax gives (drivers/address.h).
// Keywords are case-insensitive; the board number after TCPIP, ASRL and USB
// is accepted and ignored (one host, one board of each kind), except for
// ASRLn, where it names the port.
//
//   TCPIP[n]::HOST::PORT::SOCKET          raw SCPI socket  = tcp:HOST:PORT
//   TCPIP[n]::HOST[::DEVICE][::INSTR]     VXI-11           = vxi11:HOST:DEVICE (DEVICE defaults to inst0)
//   ASRL/dev/PATH[::INSTR]                serial port      = serial:/dev/PATH (options may follow '?')
//   ASRLn[::INSTR]                        serial port      = serial:/dev/ttyS(n-1)
//   USB[n]::VID::PID::SERIAL[::IF][::INSTR]
//                                         USB-TMC          = the /dev/usbtmcN whose USB device has that
//                                         vendor and product id (0x-hex or decimal), serial number and, when
//                                         given, interface number; found at open time by ResolveUsbtmc
//                                         (drivers/usb_sysfs.h)
//
// HOST is a name, an IPv4 address or an IPv6 literal in brackets. HiSLIP
// (hislipN device names), GPIB, PXI, VXI and USB ::RAW resources are refused
// with a message naming what is supported.
#pragma once

#include <string_view>

#include "drivers/address.h"
#include "drivers/status.h"

namespace kp {

// True when `head` (an address without its '?' options) is meant as a VISA
// resource string: it contains "::" after a word that starts like one of
// TCPIP, ASRL, USB, GPIB, PXI, VXI (any case).
bool LooksLikeVisaResource(std::string_view head);

// Parses a VISA resource string into `a` (its kind and fields; a.text is left
// as the caller set it). Errors quote the text and say which part is wrong.
Status ParseVisaResource(std::string_view head, Address& a);

}  // namespace kp
