#include "ui/web/lab_server.h"

#include <httplib.h>

#include <charconv>
#include <chrono>
#include <thread>

#include <fmt/format.h>

#include "rig/lab/lab_schema.h"
#include "ui/web/lab_web.h"
#include "rig/lab/pg.h"

namespace kp::lab {
namespace {

// Compares without an early exit (the time taken does not tell how much matched).
bool SameSecret(std::string_view a, std::string_view b) {
  unsigned diff = a.size() == b.size() ? 0u : 1u;
  for (size_t i = 0; i < a.size(); ++i) diff |= static_cast<unsigned>(a[i] ^ (i < b.size() ? b[i] : 0));
  return diff == 0;
}

}  // namespace

bool IsLoopbackHost(const std::string& host) {
  return host == "localhost" || host == "::1" || host.starts_with("127.");
}

Status ParseListen(const std::string& text, std::string& host, int& port) {
  std::string h, p;
  if (text.starts_with("[")) {
    const size_t close = text.find(']');
    if (close == std::string::npos || close + 1 >= text.size() || text[close + 1] != ':')
      return InvalidInput(fmt::format("--listen '{}': give [ADDRESS]:PORT", text));
    h = text.substr(1, close - 1);
    p = text.substr(close + 2);
  } else {
    const size_t colon = text.rfind(':');
    if (colon == std::string::npos || colon == 0) return InvalidInput(fmt::format("--listen '{}': give HOST:PORT, e.g. 127.0.0.1:8080", text));
    h = text.substr(0, colon);
    p = text.substr(colon + 1);
  }
  int n = -1;
  auto [ptr, ec] = std::from_chars(p.data(), p.data() + p.size(), n);
  if (ec != std::errc() || ptr != p.data() + p.size() || n < 0 || n > 65535)
    return InvalidInput(fmt::format("--listen '{}': the port must be a number from 0 to 65535", text));
  host = h;
  port = n;
  return Status::Ok();
}

Status Serve(const ServeOptions& o, const std::atomic<bool>* stop, const std::function<void(int)>& ready) {
  if (stop == nullptr) return InternalError("Serve needs a stop flag");
  if (!pg::IsPostgresUrl(o.db_url)) return InvalidInput(fmt::format("--db '{}': give the lab database as postgresql://...", o.db_url));
  if (!IsLoopbackHost(o.host) && o.token.empty())
    return InvalidInput(fmt::format("listening on {} (beyond this machine) needs a token: --token or KNEEPOINT_SERVE_TOKEN", o.host));
  {
    KP_ASSIGN_OR_RETURN(auto conn, pg::PgConn::Connect(o.db_url));
    KP_ASSIGN_OR_RETURN(int v, LabSchemaVersion(*conn));
    if (v == 0) return NotFound(fmt::format("{} holds no kneepoint lab data yet (send some with `kneepoint sync --to`)", pg::RedactUrl(o.db_url)));
    if (v != kLabSchemaVersion)
      return InvalidInput(fmt::format("{}: lab schema version {}, this kneepoint serves version {}", pg::RedactUrl(o.db_url), v, kLabSchemaVersion));
  }
  LabWeb web(o.db_url);
  httplib::Server server;
  server.set_pre_routing_handler([&](const httplib::Request& req, httplib::Response& res) {
    res.set_header("X-Content-Type-Options", "nosniff");
    res.set_header("Cache-Control", "no-store");
    res.set_header("Content-Security-Policy",
                   "default-src 'none'; script-src 'unsafe-inline'; style-src 'unsafe-inline'; connect-src 'self'; img-src 'self'");
    if (req.method != "GET" && req.method != "HEAD") {
      res.status = 405;
      res.set_header("Allow", "GET, HEAD");
      res.set_content(R"({"schema_version":1,"error":"read only: GET and HEAD only"})", "application/json");
      return httplib::Server::HandlerResponse::Handled;
    }
    if (!o.token.empty()) {
      std::string given;
      const std::string auth = req.get_header_value("Authorization");
      if (auth.starts_with("Bearer ")) given = auth.substr(7);
      // The page itself may be opened with the token in its address.
      if (given.empty() && req.path == "/" && req.has_param("token")) given = req.get_param_value("token");
      if (!SameSecret(given, o.token)) {
        res.status = 401;
        res.set_header("WWW-Authenticate", "Bearer");
        res.set_content(R"kp({"schema_version":1,"error":"a token is required (Authorization: Bearer TOKEN)"})kp", "application/json");
        return httplib::Server::HandlerResponse::Handled;
      }
    }
    return httplib::Server::HandlerResponse::Unhandled;
  });
  server.Get(R"(/.*)", [&](const httplib::Request& req, httplib::Response& res) {
    LabWeb::Params params(req.params.begin(), req.params.end());
    LabWeb::Response r = web.Get(req.path, params);
    res.status = r.status;
    res.set_content(r.body, r.content_type);
  });
  int port = o.port;
  if (port == 0) {
    port = server.bind_to_any_port(o.host);
    if (port < 0) return IoError(fmt::format("cannot listen on {} (any port)", o.host));
  } else if (!server.bind_to_port(o.host, port)) {
    return IoError(fmt::format("cannot listen on {}:{} (in use, or not an address of this machine)", o.host, port));
  }
  std::thread watcher([&] {
    while (!stop->load()) std::this_thread::sleep_for(std::chrono::milliseconds(50));
    server.stop();
  });
  if (ready) ready(port);
  const bool ok = server.listen_after_bind();
  watcher.join();
  if (!ok && !stop->load()) return IoError("the web server stopped unexpectedly");
  return Status::Ok();
}

}  // namespace kp::lab
