// VXI-11 transport: a LAN instrument reached by VXI-11 (ONC RPC: the
// portmapper on port 111 names the DEVICE_CORE port; create_link,
// device_write, device_read, destroy_link), through liblxi
// (lxi_connect / lxi_send / lxi_receive / lxi_disconnect). One command line
// is one device_write (ended with the address's terminator as well as VXI-11's
// END flag), one reply one device_read sequence up to END; the terminator is
// stripped. Timeouts are the RPC calls' (each read's timeout); liblxi does not
// tell a timeout from a broken link, so a failed read is reported as a
// timeout and a failed write as a link error (the session then reconnects).
// Not thread-safe.
#pragma once

#include <memory>

#include "drivers/address.h"
#include "drivers/transport.h"

namespace kp {

// Opens a kVxi11 address (create_link to its device name, inst0 by default).
Result<std::unique_ptr<Transport>> OpenVxi11Transport(const Address& address, Seconds connect_timeout);

}  // namespace kp
