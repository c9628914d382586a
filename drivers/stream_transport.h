// Stream transports: instruments on a TCP socket or a serial line.
//
// Both frame lines the same way (the address's terminator, `eol=`) and time
// out in real (wall) time: an instrument answers at its own pace whatever
// Clock the run uses. A closed or broken link fails with kIo; Reconnect()
// reopens it. Serial ports open through libserialport; pseudo-terminals
// (/dev/pts/*) and any path libserialport refuses fall back to plain POSIX
// termios with the same settings, and the fallback is reported through the
// `note` callback. Not thread-safe (one session per transport).
#pragma once

#include <functional>
#include <memory>
#include <string>
#include <string_view>

#include "drivers/address.h"
#include "drivers/usbtmc_transport.h"
#include "drivers/transport.h"

namespace kp {

struct StreamOptions {
  Seconds connect_timeout{3.0};
  // Receives one-line notes for the log (e.g. "using POSIX termios for /dev/pts/3").
  std::function<void(std::string_view)> note;
  // usbtmc: how the device is opened and where USB identities are looked up
  // (tests inject both; drivers/usbtmc_transport.h).
  UsbtmcOptions usbtmc;
};

// Opens a tcp:, serial:, usbtmc: or vxi11: address (pty is a server-side
// form and is refused).
Result<std::unique_ptr<Transport>> OpenTransport(const Address& address, const StreamOptions& options = {});
// Same, from the address text.
Result<std::unique_ptr<Transport>> OpenTransport(std::string_view address, const StreamOptions& options = {});

// Applies raw mode and `settings` to a terminal file descriptor (termios).
Status ConfigureTermios(int fd, const SerialSettings& settings, const std::string& what);

}  // namespace kp
