// Discovery: the instruments this computer can reach, each with an address a
// rig file takes as it is. Serial ports and USB-TMC devices come from the
// kernel's own information (drivers/device_sysfs.h); LAN instruments from a
// VXI-11 broadcast (liblxi's lxi_discover: an RPC portmapper GETPORT for
// DEVICE_CORE sent to the broadcast address of each interface, then *IDN? to
// every instrument that answers). `kneepoint ports` and `kneepoint discover`
// print these.
#pragma once

#include <string>
#include <vector>

#include "drivers/device_sysfs.h"
#include "drivers/stream_transport.h"

namespace kp {

struct FoundInstrument {
  std::string kind;         // "serial", "usbtmc", "lan"
  std::string address;      // ready for a rig file: serial:/dev/..., USB0::...::INSTR, TCPIP0::HOST::INSTR
  std::string path_address; // the same by device path (usbtmc:/dev/usbtmc0), empty when none
  std::string description;  // what the kernel or the network says it is
  std::vector<std::string> also;  // other names for it (/dev/serial/by-id links)
  std::string identity;     // *IDN? reply, when asked and answered
  std::string error;        // why *IDN? failed, when asked
  std::string dialect;      // a shipped dialect whose identity pattern matches (not the generic "*" ones)
};

// Serial ports (bus-labelled) and USB-TMC devices, in that order.
std::vector<FoundInstrument> DiscoverLocal(const SysfsRoots& roots = {});

// LAN instruments answering a VXI-11 broadcast within `timeout` (their
// *IDN? comes with the answer). `note` receives liblxi's broadcast lines.
std::vector<FoundInstrument> DiscoverLan(Seconds timeout);

// Asks *IDN? at the instrument's address (serial ports at `serial_options`,
// e.g. "baud=115200"; empty: the defaults) and fills identity or error, and
// dialect when a shipped one matches.
void IdentifyInstrument(FoundInstrument& f, Seconds timeout, const StreamOptions& options, const std::string& serial_options = "");

// The shipped dialect whose identity pattern matches `idn` ("" when none;
// dialects that accept any reply are left out).
std::string MatchingDialect(const std::string& idn);

// The lines to paste into a rig file for one instrument: an [[instrument]]
// table with name, address, profile (the matched dialect or a placeholder to
// fill in) and roles, the description and identity as comments.
std::string RigFileLines(const FoundInstrument& f, const std::string& name);

}  // namespace kp
