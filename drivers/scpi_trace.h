// Trace file for SCPI exchanges (`--trace FILE`): one line per exchange,
//   2026-12-01T21:44:15.123Z  t=12.000s  tcp:127.0.0.1:5025  >  MEAS:VOLT?
// wall time (UTC, milliseconds), the run clock's time, the address, the
// direction ('>' sent, '<' received, '!' failure or retry) and the text.
// The hook is thread-safe and may be shared by several sessions; the file is
// flushed after every line so a crash loses nothing already traced.
#pragma once

#include <string>

#include "drivers/scpi_session.h"

namespace kp {

// Opens (appends to) `path`; fails with kIo naming the path.
Result<ScpiTraceHook> OpenTraceFile(const std::string& path);

// Trace lines that could not be written (a full disk, an I/O error) since the
// last call, in words ("trace file 'x': 12 lines lost: No space left on
// device"); empty when none. The run records it as an event: a trace that
// stops short says so instead of ending silently.
std::string TakeTraceWriteErrors();

}  // namespace kp
