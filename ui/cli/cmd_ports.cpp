// `ports`: serial ports the system knows (libserialport's enumeration).
#include <iostream>

#include <fmt/format.h>
#include <libserialport.h>

#include "ui/cli/cli.h"

namespace kp::cli {
namespace {

int RunPorts() {
  sp_port** ports = nullptr;
  if (sp_list_ports(&ports) != SP_OK) {
    char* m = sp_last_error_message();
    std::string msg = m != nullptr ? m : "unknown error";
    if (m != nullptr) sp_free_error_message(m);
    return Fail(IoError("cannot list serial ports: " + msg));
  }
  int n = 0;
  for (sp_port** p = ports; *p != nullptr; ++p, ++n) {
    const char* name = sp_get_port_name(*p);
    const char* desc = sp_get_port_description(*p);
    std::string usb = "-";
    int vid = 0, pid = 0;
    if (sp_get_port_transport(*p) == SP_TRANSPORT_USB && sp_get_port_usb_vid_pid(*p, &vid, &pid) == SP_OK)
      usb = fmt::format("{:04x}:{:04x}", vid, pid);
    std::cout << fmt::format("serial:{:<24} usb {:<10} {}\n", name != nullptr ? name : "?", usb, desc != nullptr ? desc : "");
  }
  sp_free_port_list(ports);
  if (n == 0) std::cout << "no serial ports found (TCP instruments are addressed as tcp:HOST:5025)\n";
  return kExitOk;
}

}  // namespace

void RegisterPorts(CliRegistry& r) {
  r.Add("ports", "List serial ports: address, USB VID:PID, description", [] { return RunPorts(); });
}

}  // namespace kp::cli
