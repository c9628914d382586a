// Device identity: what names one instrument however its address is spelt,
// for the one-runner-per-rig lock. `tcp:localhost:5025`, `tcp:127.0.0.1:5025`
// and `tcp:[::1]:5025` are one device; `/dev/ttyUSB0` and a symlink to it
// (`/dev/serial/by-id/...`) are one device.
#pragma once

#include <string>

#include "drivers/address.h"

namespace kp {

// "tcp:127.0.0.1:5025" (the host resolved to its numeric address; every
// loopback address is "tcp:loopback:PORT"; the lowest of several addresses),
// "serial:/dev/ttyUSB0" (the real path, symlinks resolved), the address text
// otherwise or when resolving fails (then the key is at least what was written).
std::string DeviceIdentity(const Address& address);

}  // namespace kp
