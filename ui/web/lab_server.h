// The HTTP side of `kneepoint serve` (cpp-httplib): LabWeb's answers over
// HTTP/1.1, GET and HEAD only (anything else: 405), a bearer token required
// when one is set (and one must be set to listen beyond loopback).
#pragma once

#include <atomic>
#include <functional>
#include <string>

#include "drivers/status.h"

namespace kp::lab {

struct ServeOptions {
  std::string db_url;
  std::string host = "127.0.0.1";
  int port = 8080;   // 0: any free port (tests)
  std::string token; // empty: none (only allowed on loopback)
};

// "127.0.0.1:8080", "[::1]:8080", "0.0.0.0:80", "localhost:8080" into host and port.
Status ParseListen(const std::string& text, std::string& host, int& port);
bool IsLoopbackHost(const std::string& host);

// Serves until `stop` becomes true. `ready` is called with the bound port.
// Refuses a non-loopback address without a token, and a database that is not
// a kneepoint lab database.
Status Serve(const ServeOptions& options, const std::atomic<bool>* stop, const std::function<void(int)>& ready);

}  // namespace kp::lab
