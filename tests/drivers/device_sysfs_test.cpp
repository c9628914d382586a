// The kernel's view of instrument ports, read from a small fake sysfs tree
// laid out as Linux lays it out (class links to device folders, USB device
// attributes on the parent of the interface).
#include <filesystem>
#include <fstream>

#include <gtest/gtest.h>
#include <unistd.h>

#include "drivers/device_sysfs.h"
#include "drivers/stream_transport.h"
#include "tests/support/fake_sysfs.h"

namespace kp {
namespace {

namespace fs = std::filesystem;

using testing::FakeSysfs;

TEST(DeviceSysfs, UsbtmcDevicesWithTheirUsbIdentity) {
  FakeSysfs f;
  fs::path psu = f.UsbDevice("usb1/1-2", "1ab1", "0e11", "DP8B000123", "DP-Supply");
  f.Usbtmc("usbtmc0", psu, "1-2:1.0", 0);
  fs::path load = f.UsbDevice("usb1/1-3", "2ec7", "6700", "LD0042", "Electronic Load");
  f.Usbtmc("usbtmc1", load, "1-3:1.1", 1);
  std::vector<UsbtmcDevice> all = ListUsbtmcDevices(f.roots());
  ASSERT_EQ(all.size(), 2u);
  EXPECT_EQ(all[0].name, "usbtmc0");
  EXPECT_EQ(all[0].dev_path, (f.dev() / "usbtmc0").string());
  EXPECT_EQ(all[0].usb.vid, 0x1ab1);
  EXPECT_EQ(all[0].usb.pid, 0x0e11);
  EXPECT_EQ(all[0].usb.serial, "DP8B000123");
  EXPECT_EQ(all[0].interface, 0);
  EXPECT_EQ(UsbtmcResource(all[0]), "USB0::0x1AB1::0x0E11::DP8B000123::INSTR");
  EXPECT_EQ(all[1].interface, 1);
  EXPECT_EQ(UsbtmcResource(all[1]), "USB0::0x2EC7::0x6700::LD0042::1::INSTR");

  // The printed resource string reads back to the same device.
  Result<Address> a = ParseAddress(UsbtmcResource(all[1]));
  ASSERT_TRUE(a.ok()) << a.status().ToString();
  ASSERT_TRUE(ResolveUsbtmc(*a, f.roots()).ok());
  EXPECT_EQ(a->path, (f.dev() / "usbtmc1").string());

  Result<Address> b = ParseAddress("USB::0x1ab1::3601::DP8B000123::INSTR");
  ASSERT_TRUE(b.ok());
  ASSERT_TRUE(ResolveUsbtmc(*b, f.roots()).ok());
  EXPECT_EQ(b->path, (f.dev() / "usbtmc0").string());

  Result<Address> missing = ParseAddress("USB0::0x1AB1::0x0E11::OTHER::INSTR");
  ASSERT_TRUE(missing.ok());
  Status st = ResolveUsbtmc(*missing, f.roots());
  ASSERT_FALSE(st.ok());
  EXPECT_EQ(st.code(), StatusCode::kNotFound);
  EXPECT_NE(st.message().find("no usbtmc device is 1ab1:0e11 serial 'OTHER'"), std::string::npos) << st.message();
  EXPECT_NE(st.message().find("USB0::0x1AB1::0x0E11::DP8B000123::INSTR"), std::string::npos) << "lists what is there: " << st.message();

  // Opening goes through the same lookup.
  StreamOptions so;
  so.usbtmc.sysfs = f.roots();
  auto t = OpenTransport("USB0::0x1AB1::0x0E11::OTHER::INSTR", so);
  ASSERT_FALSE(t.ok());
  EXPECT_EQ(t.status().code(), StatusCode::kNotFound);
}

TEST(DeviceSysfs, NoUsbtmcDriverIsAnEmptyListAndAClearError) {
  FakeSysfs f;
  EXPECT_TRUE(ListUsbtmcDevices(f.roots()).empty());
  Result<Address> a = ParseAddress("USB0::0x1AB1::0x0E11::SN::INSTR");
  ASSERT_TRUE(a.ok());
  Status st = ResolveUsbtmc(*a, f.roots());
  EXPECT_NE(st.message().find("is the usbtmc driver loaded?"), std::string::npos) << st.message();
}

TEST(DeviceSysfs, TwoInterfacesOfOneDeviceNeedTheInterfaceNumber) {
  FakeSysfs f;
  fs::path d = f.UsbDevice("usb1/1-4", "0957", "1507", "MY123", "Dual");
  f.Usbtmc("usbtmc0", d, "1-4:1.0", 0);
  f.Usbtmc("usbtmc1", d, "1-4:1.1", 1);
  Result<Address> a = ParseAddress("USB0::0x0957::0x1507::MY123::INSTR");
  ASSERT_TRUE(a.ok());
  Status st = ResolveUsbtmc(*a, f.roots());
  EXPECT_NE(st.message().find("2 usbtmc devices match"), std::string::npos) << st.message();
  Result<Address> b = ParseAddress("USB0::0x0957::0x1507::MY123::1::INSTR");
  ASSERT_TRUE(b.ok());
  ASSERT_TRUE(ResolveUsbtmc(*b, f.roots()).ok());
  EXPECT_EQ(b->path, (f.dev() / "usbtmc1").string());
}

TEST(DeviceSysfs, SerialPortsAreLabelledByTheBusTheKernelNames) {
  FakeSysfs f;
  // A USB adapter: ttyUSB0 -> the usb-serial port under the USB interface.
  fs::path adapter = f.UsbDevice("usb1/1-1", "0403", "6001", "A12345", "FT232R USB UART");
  f.UsbSerialPort("ttyUSB0", adapter, "usb-FTDI_FT232R_USB_UART_A12345-if00-port0");

  // A built-in UART: ttyS0 -> serial-base port -> serial-base controller -> platform device.
  fs::path plat = f.sys() / "devices" / "platform" / "serial8250";
  fs::create_directories(plat);
  FakeSysfs::Link(plat / "subsystem", f.sys() / "bus" / "platform");
  FakeSysfs::Link(plat / "driver", f.sys() / "bus" / "platform" / "drivers" / "serial8250");
  fs::path base = plat / "serial8250:0" / "serial8250:0.0";
  fs::create_directories(base);
  FakeSysfs::Link(base / "subsystem", f.sys() / "bus" / "serial-base");
  FakeSysfs::Link(base.parent_path() / "subsystem", f.sys() / "bus" / "serial-base");
  fs::create_directories(base / "tty" / "ttyS0");
  FakeSysfs::Write(base / "tty" / "ttyS0" / "type", "4");
  FakeSysfs::Link(base / "tty" / "ttyS0" / "device", base);
  FakeSysfs::Link(f.sys() / "class" / "tty" / "ttyS0", base / "tty" / "ttyS0");
  // ttyS1: reserved by the firmware, no UART fitted (type 0): not listed.
  fs::path base1 = plat / "serial8250:0" / "serial8250:0.1";
  fs::create_directories(base1 / "tty" / "ttyS1");
  FakeSysfs::Write(base1 / "tty" / "ttyS1" / "type", "0");
  FakeSysfs::Link(base1 / "tty" / "ttyS1" / "device", base1);
  FakeSysfs::Link(f.sys() / "class" / "tty" / "ttyS1", base1 / "tty" / "ttyS1");
  // A console tty without a device: not a port.
  fs::create_directories(f.sys() / "devices" / "virtual" / "tty" / "tty1");
  FakeSysfs::Link(f.sys() / "class" / "tty" / "tty1", f.sys() / "devices" / "virtual" / "tty" / "tty1");

  std::vector<SerialPortKernelInfo> ports = ListSerialPorts(f.roots());
  ASSERT_EQ(ports.size(), 2u);
  EXPECT_EQ(ports[0].name, "ttyS0");
  EXPECT_EQ(ports[0].bus, "platform");
  EXPECT_EQ(ports[0].driver, "serial8250");
  EXPECT_EQ(DescribePortForPeople(ports[0]), "built-in UART (platform, driver serial8250)");
  EXPECT_TRUE(ports[0].by_id.empty());
  EXPECT_EQ(ports[1].name, "ttyUSB0");
  EXPECT_EQ(ports[1].bus, "usb");
  EXPECT_EQ(ports[1].usb.vid, 0x0403);
  EXPECT_EQ(ports[1].driver, "ftdi_sio");
  EXPECT_EQ(DescribePortForPeople(ports[1]), "usb 0403:6001 Example Instruments FT232R USB UART (serial A12345) [ftdi_sio]");
  ASSERT_EQ(ports[1].by_id.size(), 1u);
  EXPECT_EQ(fs::path(ports[1].by_id[0]).filename(), "usb-FTDI_FT232R_USB_UART_A12345-if00-port0");
}

}  // namespace
}  // namespace kp
