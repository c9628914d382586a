// `discover`: serial ports, USB-TMC devices and LAN instruments (VXI-11
// broadcast), each with its *IDN? when asked, printed as lines ready to
// paste into a rig file (rig/discovery.h).
#include <iostream>

#include <fmt/format.h>

#include "drivers/text_hygiene.h"
#include "ui/cli/cli.h"
#include "rig/discovery.h"

namespace kp::cli {
namespace {

struct DiscoverOptions {
  bool identify = false;
  bool no_lan = false;
  bool lan_only = false;
  double timeout_s = 1.0;
  std::string serial_options;
  SysfsRoots roots;
};

int RunDiscover(const DiscoverOptions& o) {
  std::vector<FoundInstrument> found;
  if (!o.lan_only) found = DiscoverLocal(o.roots);
  if (!o.no_lan) {
    std::vector<FoundInstrument> lan = DiscoverLan(Seconds(o.timeout_s));
    found.insert(found.end(), lan.begin(), lan.end());
  }
  StreamOptions so;
  so.usbtmc.sysfs = o.roots;
  so.note = [](std::string_view) {};
  int n = 0;
  for (FoundInstrument& f : found) {
    if (o.identify) IdentifyInstrument(f, Seconds(o.timeout_s), so, o.serial_options);
    ++n;
    std::cout << TerminalSafe(RigFileLines(f, fmt::format("{} {}", f.kind, n))) << "\n";
  }
  if (found.empty()) std::cout << "# nothing found" << (o.no_lan ? " (LAN not searched)" : "") << "\n";
  else if (!o.identify) std::cout << "# add --identify to ask each one *IDN? and pick its dialect\n";
  return kExitOk;
}

}  // namespace

void AddSysfsRootOptions(CLI::App* c, SysfsRoots& roots);  // cmd_ports.cpp

void RegisterDiscover(CliRegistry& r) {
  static DiscoverOptions opt;
  CLI::App* c = r.Add("discover",
                      "Find instruments (serial ports, USB-TMC devices, LAN by VXI-11 broadcast) and print rig-file lines for them",
                      [] { return RunDiscover(opt); });
  c->add_flag("--identify", opt.identify, "Ask each instrument *IDN? and name the shipped dialect that matches it");
  c->add_flag("--no-lan", opt.no_lan, "Do not broadcast on the LAN");
  c->add_flag("--lan-only", opt.lan_only, "Only the LAN (no serial ports or USB)");
  AddQuantityOption(c, "--timeout", opt.timeout_s, Dimension::kTime, "How long to wait for LAN answers and for each *IDN? reply",
                    1e-3, 60.0);
  c->add_option("--serial-options", opt.serial_options, "Settings for asking serial ports, as in an address: baud=115200&eol=crlf");
  AddSysfsRootOptions(c, opt.roots);
}

}  // namespace kp::cli
