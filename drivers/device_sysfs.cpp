#include "drivers/device_sysfs.h"

#include <algorithm>
#include <charconv>
#include <filesystem>
#include <fstream>
#include <optional>

#include <fmt/format.h>

namespace kp {
namespace {

namespace fs = std::filesystem;

std::string ReadAttr(const fs::path& p) {
  std::ifstream in(p);
  std::string line;
  if (!in || !std::getline(in, line)) return {};
  while (!line.empty() && (line.back() == '\n' || line.back() == '\r' || line.back() == ' ')) line.pop_back();
  return line;
}

int ReadHex(const fs::path& p) {
  std::string s = ReadAttr(p);
  int v = 0;
  std::from_chars(s.data(), s.data() + s.size(), v, 16);
  return v;
}

std::string LinkName(const fs::path& p) {
  std::error_code ec;
  fs::path target = fs::read_symlink(p, ec);
  return ec ? std::string() : target.filename().string();
}

UsbIdentity ReadUsb(const fs::path& device) {
  UsbIdentity u;
  u.vid = ReadHex(device / "idVendor");
  u.pid = ReadHex(device / "idProduct");
  u.serial = ReadAttr(device / "serial");
  u.manufacturer = ReadAttr(device / "manufacturer");
  u.product = ReadAttr(device / "product");
  return u;
}

// The nearest ancestor (or `start` itself) that is a USB device (has idVendor).
std::optional<fs::path> UsbAncestor(fs::path p, const fs::path& sys) {
  std::error_code ec;
  for (int depth = 0; depth < 32 && !p.empty() && p != sys && p != p.root_path(); ++depth, p = p.parent_path())
    if (fs::exists(p / "idVendor", ec)) return p;
  return std::nullopt;
}

// "ttyS2" before "ttyS10": the word, then the number it ends with.
bool NaturalLess(const std::string& a, const std::string& b) {
  auto split = [](const std::string& s) {
    size_t d = s.find_last_not_of("0123456789") + 1;
    long n = d < s.size() ? std::stol(s.substr(d)) : -1;
    return std::pair<std::string, long>(s.substr(0, d), n);
  };
  return split(a) < split(b);
}

std::string UsbText(const UsbIdentity& u) {
  std::string s = fmt::format("{:04x}:{:04x}", u.vid, u.pid);
  std::string name = u.manufacturer;
  if (!u.product.empty()) name += (name.empty() ? "" : " ") + u.product;
  if (!name.empty()) s += " " + name;
  if (!u.serial.empty()) s += fmt::format(" (serial {})", u.serial);
  return s;
}

}  // namespace

std::vector<UsbtmcDevice> ListUsbtmcDevices(const SysfsRoots& roots) {
  std::vector<UsbtmcDevice> out;
  fs::path cls = fs::path(roots.sys) / "class" / "usbmisc";
  std::error_code ec;
  if (!fs::is_directory(cls, ec)) return out;
  for (const fs::directory_entry& e : fs::directory_iterator(cls, ec)) {
    std::string name = e.path().filename().string();
    if (!name.starts_with("usbtmc")) continue;
    fs::path iface = fs::canonical(e.path() / "device", ec);
    if (ec) continue;
    std::optional<fs::path> usb = UsbAncestor(iface, fs::path(roots.sys));
    if (!usb) continue;
    UsbtmcDevice d;
    d.name = name;
    d.dev_path = (fs::path(roots.dev) / name).string();
    d.usb = ReadUsb(*usb);
    std::string ifn = ReadAttr(iface / "bInterfaceNumber");
    std::from_chars(ifn.data(), ifn.data() + ifn.size(), d.interface, 16);
    out.push_back(std::move(d));
  }
  std::sort(out.begin(), out.end(), [](const UsbtmcDevice& a, const UsbtmcDevice& b) { return NaturalLess(a.name, b.name); });
  return out;
}

std::string UsbtmcResource(const UsbtmcDevice& d) {
  std::string serial = d.usb.serial.empty() ? "0" : d.usb.serial;
  if (d.interface != 0) return fmt::format("USB0::0x{:04X}::0x{:04X}::{}::{}::INSTR", d.usb.vid, d.usb.pid, serial, d.interface);
  return fmt::format("USB0::0x{:04X}::0x{:04X}::{}::INSTR", d.usb.vid, d.usb.pid, serial);
}

Status ResolveUsbtmc(Address& a, const SysfsRoots& roots) {
  if (a.kind != Address::Kind::kUsbtmc || !a.path.empty()) return Status::Ok();
  std::vector<UsbtmcDevice> all = ListUsbtmcDevices(roots);
  std::vector<const UsbtmcDevice*> hits;
  for (const UsbtmcDevice& d : all) {
    if (d.usb.vid != a.usb_vid || d.usb.pid != a.usb_pid || d.usb.serial != a.usb_serial) continue;
    if (a.usb_interface >= 0 && d.interface != a.usb_interface) continue;
    hits.push_back(&d);
  }
  if (hits.size() == 1) {
    a.path = hits.front()->dev_path;
    return Status::Ok();
  }
  std::string want = fmt::format("{:04x}:{:04x} serial '{}'", a.usb_vid, a.usb_pid, a.usb_serial);
  if (a.usb_interface >= 0) want += fmt::format(" interface {}", a.usb_interface);
  if (hits.size() > 1)
    return InvalidInput(fmt::format("address '{}': {} usbtmc devices match {}; add the interface number before ::INSTR", a.text,
                                    hits.size(), want));
  std::string there;
  for (const UsbtmcDevice& d : all) there += fmt::format("{}{} = {}", there.empty() ? "" : "; ", d.dev_path, UsbtmcResource(d));
  if (there.empty()) there = fmt::format("none (is the usbtmc driver loaded? see {}/class/usbmisc)", roots.sys);
  return NotFound(fmt::format("address '{}': no usbtmc device is {}; the kernel lists: {}", a.text, want, there));
}

SerialPortKernelInfo DescribeSerialPort(const std::string& name, const SysfsRoots& roots) {
  SerialPortKernelInfo info;
  info.name = name;
  info.path = (fs::path(roots.dev) / name).string();
  fs::path sys(roots.sys);
  std::error_code ec;
  fs::path dev = fs::canonical(sys / "class" / "tty" / name / "device", ec);
  if (ec) {
    info.bus = "virtual";
  } else if (std::optional<fs::path> usb = UsbAncestor(dev, sys)) {
    info.bus = "usb";
    info.usb = ReadUsb(*usb);
    // The driver of the interface the port hangs on (ftdi_sio, cdc_acm, ...).
    for (fs::path p = dev; !p.empty() && p != *usb; p = p.parent_path()) {
      std::string drv = LinkName(p / "driver");
      if (!drv.empty() && drv != "port") {
        info.driver = drv;
        break;
      }
    }
  } else {
    // Up through the tty layer's own devices to the bus the UART sits on.
    fs::path p = dev;
    for (int depth = 0; depth < 16 && !p.empty() && p != sys && p != p.root_path(); ++depth, p = p.parent_path()) {
      std::string sub = LinkName(p / "subsystem");
      if (sub.empty() || sub == "serial-base" || sub == "tty" || sub == "serial") continue;
      info.bus = sub;
      info.driver = LinkName(p / "driver");
      break;
    }
    if (info.bus.empty()) info.bus = "virtual";
  }
  fs::path by_id = fs::path(roots.dev) / "serial" / "by-id";
  if (fs::is_directory(by_id, ec)) {
    for (const fs::directory_entry& e : fs::directory_iterator(by_id, ec))
      if (LinkName(e.path()) == name) info.by_id.push_back(e.path().string());
    std::sort(info.by_id.begin(), info.by_id.end());
  }
  return info;
}

std::vector<SerialPortKernelInfo> ListSerialPorts(const SysfsRoots& roots) {
  std::vector<SerialPortKernelInfo> out;
  std::error_code ec;
  fs::path cls = fs::path(roots.sys) / "class" / "tty";
  if (!fs::is_directory(cls, ec)) return out;
  static const char* const kPrefixes[] = {"ttyUSB", "ttyACM", "ttyAMA", "ttymxc", "ttySAC", "ttyS", "ttyO", "rfcomm"};
  for (const fs::directory_entry& e : fs::directory_iterator(cls, ec)) {
    std::string name = e.path().filename().string();
    bool wanted = false;
    for (const char* p : kPrefixes) wanted = wanted || name.starts_with(p);
    if (!wanted || !fs::exists(e.path() / "device", ec)) continue;
    // An 8250 port the firmware reserves but that has no UART reports type 0.
    if (name.starts_with("ttyS") && fs::exists(e.path() / "type", ec) && ReadAttr(e.path() / "type") == "0") continue;
    out.push_back(DescribeSerialPort(name, roots));
  }
  std::sort(out.begin(), out.end(),
            [](const SerialPortKernelInfo& a, const SerialPortKernelInfo& b) { return NaturalLess(a.name, b.name); });
  return out;
}

std::string DescribePortForPeople(const SerialPortKernelInfo& p) {
  std::string drv = p.driver.empty() ? "" : ", driver " + p.driver;
  if (p.bus == "usb") return "usb " + UsbText(p.usb) + (p.driver.empty() ? "" : " [" + p.driver + "]");
  if (p.bus == "platform" || p.bus == "pnp" || p.bus == "amba" || p.bus == "acpi")
    return fmt::format("built-in UART ({}{})", p.bus, drv);
  if (p.bus == "pci") return fmt::format("PCI serial card ({}{})", p.bus, drv);
  if (p.bus == "virtual") return "virtual (no hardware behind it)";
  return fmt::format("{} device{}", p.bus, drv);
}

}  // namespace kp
