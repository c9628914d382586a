// `serve`: the lab's read-only web view (ui/web/lab_server.h): a JSON API
// and one self-contained page over the lab database. Loopback by default; a
// token is required to listen on any other address.
#include <fmt/format.h>

#include <cstdlib>
#include <iostream>

#include "ui/cli/cli.h"
#include "ui/web/lab_server.h"
#include "rig/lab/pg.h"

namespace kp::cli {

void RegisterServe(CliRegistry& r) {
  static std::string db, listen, token;
  db.clear(), listen = "127.0.0.1:8080", token.clear();
  CLI::App* c = r.Add("serve", "Read-only web view of the lab database: live channels, runs, figures (JSON API and one page)", [] {
    lab::ServeOptions o;
    o.db_url = db;
    if (Status st = lab::ParseListen(listen, o.host, o.port); !st.ok()) return Fail(st);
    o.token = token;
    if (o.token.empty())
      if (const char* env = std::getenv("KNEEPOINT_SERVE_TOKEN"); env != nullptr) o.token = env;
    const std::atomic<bool>* stop = InstallStopSignals();
    Status st = lab::Serve(o, stop, [&](int port) {
      const std::string host = o.host.find(':') != std::string::npos ? "[" + o.host + "]" : o.host;
      std::cout << fmt::format("serving the lab database {} at http://{}:{}/{} (read only; Ctrl+C stops)\n", pg::RedactUrl(o.db_url), host,
                               port, o.token.empty() ? "" : "?token=...")
                << std::flush;
    });
    if (!st.ok()) return Fail(st);
    return kExitOk;
  });
  c->add_option("--db", db, "Lab database, postgresql://...")->required();
  c->add_option("--listen", listen, "Address and port to listen on (loopback unless a token is set)")->capture_default_str();
  c->add_option("--token", token, "Token every request must carry (Authorization: Bearer TOKEN; the page: /?token=TOKEN); "
                                  "default: $KNEEPOINT_SERVE_TOKEN");
}

}  // namespace kp::cli
