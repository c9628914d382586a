// A real PostgreSQL server for the lab tests, from Debian's `postgresql`
// package (binaries under /usr/lib/postgresql/<version>/bin, or the folder
// $KNEEPOINT_TEST_PG_BIN names): initdb into a
// fresh temporary folder, listening only on a Unix socket in that folder (no
// TCP at all), started with `pg_ctl -w start`, stopped and removed with the
// object. PostgreSQL refuses to run as root: when the tests are root, the
// folder is given to the `postgres` system user and initdb / pg_ctl run as
// that user through `runuser -u postgres --`.
//
// When the server cannot be started (package missing, no `postgres` user),
// Start() says why and how to fix it; tests assert on it, so a machine
// without PostgreSQL fails them instead of skipping them.
#pragma once

#include <memory>
#include <string>

#include "drivers/status.h"

namespace kp::testing {

class PgServer {
 public:
  static Result<std::unique_ptr<PgServer>> Start();
  ~PgServer();

  // A connection URL to database `db` on this server (trust authentication,
  // user postgres, the socket folder as host).
  std::string Url(const std::string& db = "postgres") const;
  // CREATE DATABASE with a fresh name; its URL.
  Result<std::string> NewDatabase();
  // pg_ctl stop (fast) / start again, the data kept: an outage.
  Status Stop();
  Status StartAgain();
  bool running() const { return running_; }
  const std::string& folder() const { return dir_; }

 private:
  PgServer() = default;
  Status RunTool(const std::string& tool_and_args, const std::string& what);
  std::string bin_, dir_;
  bool as_postgres_ = false;
  bool running_ = false;
  int databases_ = 0;
};

}  // namespace kp::testing
