// `ports`: serial ports and USB-TMC devices as the kernel describes them
// (sysfs: a USB adapter with its identity, or a UART built into the board),
// with udev's stable /dev/serial/by-id names.
#include <iostream>

#include <fmt/format.h>

#include "drivers/text_hygiene.h"
#include "ui/cli/cli.h"
#include "rig/discovery.h"

namespace kp::cli {
namespace {

struct PortsOptions {
  SysfsRoots roots;
};

int RunPorts(const PortsOptions& o) {
  std::vector<FoundInstrument> found = DiscoverLocal(o.roots);
  for (const FoundInstrument& f : found) {
    std::cout << TerminalSafe(fmt::format("{:<32} {}\n", f.path_address, f.description));
    if (f.address != f.path_address) std::cout << TerminalSafe(fmt::format("{:<32} (same device)\n", f.address));
    for (const std::string& a : f.also)
      if ("serial:" + a != f.path_address) std::cout << TerminalSafe(fmt::format("{:<32} (same device)\n", "serial:" + a));
  }
  if (found.empty())
    std::cout << "no serial ports or USB-TMC devices found (LAN instruments: `kneepoint discover`, or tcp:HOST:5025)\n";
  return kExitOk;
}

}  // namespace

void AddSysfsRootOptions(CLI::App* c, SysfsRoots& roots) {
  c->add_option("--sysfs-root", roots.sys, "Read the kernel's device information under this folder instead of /sys (for tests)")
      ->group("Testing");
  c->add_option("--dev-root", roots.dev, "Device files under this folder instead of /dev (for tests)")->group("Testing");
}

void RegisterPorts(CliRegistry& r) {
  static PortsOptions opt;
  CLI::App* c = r.Add("ports", "List serial ports (USB adapter or built-in UART, by-id names) and USB-TMC devices",
                      [] { return RunPorts(opt); });
  AddSysfsRootOptions(c, opt.roots);
}

}  // namespace kp::cli
