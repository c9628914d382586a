// USB-TMC transport: an instrument behind the Linux usbtmc driver
// (/dev/usbtmcN). The driver does the USBTMC message framing itself: one
// write() sends one complete message (EOM set on its last transfer), one
// read() asks the instrument for its reply and returns that one message. So
// each command line is one write, each reply one read, the terminator is
// stripped from the reply when present, and timeouts are the driver's
// (USBTMC_IOCTL_SET_TIMEOUT, set from each read's timeout; the driver fails
// the read with ETIMEDOUT). Flush() after a timeout issues a device clear
// (USBTMC_IOCTL_CLEAR), which empties the instrument's output queue.
//
// The device is opened through an injectable opener (tests hand in one end of
// a SOCK_SEQPACKET socket pair, which keeps message boundaries as the driver
// does). A descriptor that is not a character device is read with poll()
// for the timeout, since it cannot take the driver's ioctls.
//
// An address given by USB identity (a VISA USB resource string) is looked up
// by sysfs when opened and again on Reconnect(): after a re-plug the device
// may come back under another number. Not thread-safe.
#pragma once

#include <functional>
#include <memory>
#include <string>

#include "drivers/address.h"
#include "drivers/device_sysfs.h"
#include "drivers/transport.h"

namespace kp {

// Opens a device path and returns its file descriptor (the caller owns it).
using DeviceOpener = std::function<Result<int>(const std::string& path)>;

struct UsbtmcOptions {
  DeviceOpener open;   // empty: open(2) with O_RDWR | O_CLOEXEC
  SysfsRoots sysfs;    // where USB identities are looked up
};

// Opens a kUsbtmc address (resolving a USB identity first).
Result<std::unique_ptr<Transport>> OpenUsbtmcTransport(const Address& address, const UsbtmcOptions& options = {});

}  // namespace kp
