// What the Linux kernel says about instrument ports, read from sysfs (and the
// udev links under /dev): USB-TMC devices with their USB identity, and what a
// serial port is (a USB adapter or a built-in UART). Both roots are
// parameters so that tests build a small fake tree; the defaults are the
// real ones.
//
//   /sys/class/usbmisc/usbtmcN/device      -> the USB interface (bInterfaceNumber);
//                                             its parent is the USB device (idVendor,
//                                             idProduct, serial, manufacturer, product)
//   /sys/class/tty/NAME/device             -> the port's device; an ancestor with idVendor
//                                             means a USB adapter, else the device's
//                                             subsystem (platform, pnp, pci, ...) names it
//   /dev/serial/by-id/*                    -> udev's stable names for USB serial ports
#pragma once

#include <string>
#include <vector>

#include "drivers/address.h"
#include "drivers/status.h"

namespace kp {

struct SysfsRoots {
  std::string sys = "/sys";
  std::string dev = "/dev";
};

struct UsbIdentity {
  int vid = 0, pid = 0;
  std::string serial, manufacturer, product;
};

struct UsbtmcDevice {
  std::string name;       // "usbtmc0"
  std::string dev_path;   // "/dev/usbtmc0" (under roots.dev)
  UsbIdentity usb;
  int interface = 0;      // bInterfaceNumber
};

// The usbtmc devices the kernel lists, by name. None (no usbmisc class, no
// driver loaded) is an empty list, not an error.
std::vector<UsbtmcDevice> ListUsbtmcDevices(const SysfsRoots& roots = {});

// For an Address of kind kUsbtmc given by its USB identity (empty path):
// fills in `path` with the one matching device. Errors list what is there.
Status ResolveUsbtmc(Address& a, const SysfsRoots& roots = {});

// The VISA-style resource string of a device: USB0::0x1AB1::0x0E11::SERIAL::INSTR
// (the interface added when it is not 0).
std::string UsbtmcResource(const UsbtmcDevice& d);

struct SerialPortKernelInfo {
  std::string name;      // "ttyUSB0"
  std::string path;      // "/dev/ttyUSB0" (under roots.dev)
  // "usb" (an adapter on the USB bus), "platform" / "pnp" (a UART built into
  // the board or chipset), "pci" (a card), or the subsystem's own name;
  // "virtual" when the kernel lists no device behind it.
  std::string bus;
  UsbIdentity usb;        // bus == "usb"
  std::string driver;    // the device's driver name, when the kernel says
  std::vector<std::string> by_id;  // /dev/serial/by-id names that point at it
};

// What the kernel says about one tty (name as in /sys/class/tty).
SerialPortKernelInfo DescribeSerialPort(const std::string& name, const SysfsRoots& roots = {});

// The serial ports worth listing: every tty of /sys/class/tty with a device
// behind it whose name starts with ttyS, ttyUSB, ttyACM, ttyAMA, ttymxc,
// ttySAC, ttyO or rfcomm; ttyS ports whose UART type is 0 (none fitted) are
// left out. Sorted by name.
std::vector<SerialPortKernelInfo> ListSerialPorts(const SysfsRoots& roots = {});

// One line describing a port for people: "usb 0403:6001 FTDI FT232R (serial A12345)",
// "built-in UART (platform, driver 8250)".
std::string DescribePortForPeople(const SerialPortKernelInfo& p);

}  // namespace kp
