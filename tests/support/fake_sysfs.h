// A small fake sysfs and /dev tree in a temporary folder, laid out as Linux
// lays them out (class links to device folders, USB identity on the parent of
// an interface), for the tests of drivers/device_sysfs.h and discovery.
#pragma once

#include <cstdio>
#include <filesystem>
#include <fstream>
#include <string>

#include <gtest/gtest.h>
#include <unistd.h>

#include "drivers/device_sysfs.h"

namespace kp::testing {

namespace fs = std::filesystem;

class FakeSysfs {
 public:
  FakeSysfs() {
    root_ = fs::temp_directory_path() / ("kp-sysfs-" + std::to_string(::getpid()) + "-" +
                                         ::testing::UnitTest::GetInstance()->current_test_info()->name());
    fs::remove_all(root_);
    fs::create_directories(sys() / "class" / "tty");
    fs::create_directories(dev() / "serial" / "by-id");
    fs::create_directories(sys() / "bus" / "usb");
    fs::create_directories(sys() / "bus" / "platform");
    fs::create_directories(sys() / "bus" / "serial-base");
    fs::create_directories(sys() / "bus" / "pnp");
    fs::create_directories(sys() / "bus" / "usb-serial" / "drivers" / "ftdi_sio");
    fs::create_directories(sys() / "bus" / "platform" / "drivers" / "serial8250");
  }
  ~FakeSysfs() { fs::remove_all(root_); }
  fs::path sys() const { return root_ / "sys"; }
  fs::path dev() const { return root_ / "dev"; }
  SysfsRoots roots() const { return {sys().string(), dev().string()}; }

  static void Write(const fs::path& p, const std::string& text) {
    fs::create_directories(p.parent_path());
    std::ofstream(p) << text << "\n";
  }
  // A USB device folder with its identity.
  fs::path UsbDevice(const std::string& bus_path, const std::string& vid, const std::string& pid, const std::string& serial,
                     const std::string& product) {
    fs::path d = sys() / "devices" / "pci0000:00" / "0000:00:14.0" / bus_path;
    Write(d / "idVendor", vid);
    Write(d / "idProduct", pid);
    if (!serial.empty()) Write(d / "serial", serial);
    Write(d / "manufacturer", "Example Instruments");
    Write(d / "product", product);
    Link(d / "subsystem", sys() / "bus" / "usb");
    return d;
  }
  void Usbtmc(const std::string& name, const fs::path& usb_device, const std::string& iface, int number) {
    fs::path i = usb_device / iface;
    Write(i / "bInterfaceNumber", Hex2(number));
    Link(i / "subsystem", sys() / "bus" / "usb");
    fs::path cls = i / "usbmisc" / name;
    fs::create_directories(cls);
    Link(cls / "device", i);
    fs::create_directories(sys() / "class" / "usbmisc");
    Link(sys() / "class" / "usbmisc" / name, cls);
  }
  static std::string Hex2(int n) {
    char b[8];
    std::snprintf(b, sizeof b, "%02x", n);
    return b;
  }
  // A USB serial adapter's port (ttyUSBn under the adapter's interface),
  // with its udev by-id link.
  void UsbSerialPort(const std::string& name, const fs::path& adapter, const std::string& by_id) {
    fs::path port = adapter / (adapter.filename().string() + ":1.0") / name;
    fs::create_directories(port);
    fs::create_directories(sys() / "bus" / "usb-serial" / "drivers" / "ftdi_sio");
    Link(port / "subsystem", sys() / "bus" / "usb-serial");
    Link(port / "driver", sys() / "bus" / "usb-serial" / "drivers" / "ftdi_sio");
    Link(sys() / "class" / "tty" / name, port / "tty" / name);
    Link(port / "tty" / name / "device", port);
    if (!by_id.empty()) Link(dev() / "serial" / "by-id" / by_id, dev() / name);
  }
  static void Link(const fs::path& at, const fs::path& to) {
    fs::create_directories(at.parent_path());
    fs::create_symlink(fs::relative(to, at.parent_path()), at);
  }

 private:
  fs::path root_;
};

}  // namespace kp::testing
