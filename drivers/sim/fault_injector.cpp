#include "drivers/sim/fault_injector.h"

#include <algorithm>
#include <cctype>

#include "drivers/scpi_syntax.h"

namespace kp::sim {
namespace {

bool Every(int n, int count) { return n > 0 && count % n == 0; }

std::string Upper(std::string_view s) {
  std::string out(s);
  std::transform(out.begin(), out.end(), out.begin(), [](unsigned char c) { return static_cast<char>(std::toupper(c)); });
  return out;
}

// A command with a numeric argument ("CURR 1.5", "VOLT:PROT:LOW 2.5").
bool IsSetting(std::string_view line) {
  ScpiCommand c = SplitScpiCommand(line);
  if (c.header.empty() || c.header.front() == '*' || c.args.size() != 1) return false;
  Result<ScpiNumber> n = ParseScpiNumber(c.args[0]);
  return n.ok();
}

}  // namespace

FaultedReply FaultInjector::Respond(std::string_view line) {
  std::lock_guard<std::mutex> lock(mu_);
  FaultedReply out;
  bool query = line.find('?') != std::string_view::npos;
  if (!query) {
    if (options_.refuse_setting_at > 0 && IsSetting(line) && ++settings_ == options_.refuse_setting_at) {
      errors_.push_back("-222,\"Data out of range\"");
      out.fault = "refused setting";
      ++faults_;
      return out;
    }
    out.reply = inner_.HandleLine(line);
    return out;
  }
  ++queries_;
  ScpiCommand c = SplitScpiCommand(line);
  const bool error_query = ScpiHeaderMatches("SYSTem:ERRor[:NEXT]?", c.header);
  if (!errors_.empty() && error_query) {
    out.reply = errors_.front();
    errors_.pop_front();
    return out;
  }
  out.reply = inner_.HandleLine(line);
  if (!out.reply) return out;
  std::string header = Upper(c.header);
  if (options_.stick_at > 0 && queries_ >= options_.stick_at && header.find("MEAS") != std::string::npos) {
    auto [it, inserted] = stuck_.emplace(header, *out.reply);
    if (!inserted) {
      out.reply = it->second;
      out.fault = "stuck reading";
      ++faults_;
    }
  }
  if (options_.disconnect_at > 0 && !disconnected_ && queries_ == options_.disconnect_at) {
    disconnected_ = true;
    out.reply.reset();
    out.disconnect = true;
    out.fault = "disconnect";
  } else if (Every(options_.drop_every, queries_)) {
    out.reply.reset();
    out.fault = "dropped reply";
  } else if (Every(options_.error_every, queries_) && !error_query) {
    out.reply = "9.91E37";
    errors_.push_back("-230,\"Data corrupt or stale\"");
    out.fault = "scpi error";
  } else if (Every(options_.corrupt_every, queries_)) {
    std::string& r = *out.reply;
    // Flip the characters the way line noise does: a valid-looking start, garbage after.
    for (size_t i = r.size() / 2; i < r.size(); ++i) r[i] = static_cast<char>('#' + (i % 7));
    if (r.size() < 2) r = "#?";
    out.fault = "corrupted reply";
  } else if (Every(options_.delay_every, queries_)) {
    out.delay = Seconds(options_.delay_s);
    out.fault = "delayed reply";
  }
  if (!out.fault.empty() && out.fault != "stuck reading") ++faults_;
  return out;
}

std::optional<std::string> FaultInjector::HandleLine(std::string_view line) {
  FaultedReply r = Respond(line);
  if (r.disconnect) return std::nullopt;
  return r.reply;
}

int FaultInjector::faults_injected() const {
  std::lock_guard<std::mutex> lock(mu_);
  return faults_;
}

}  // namespace kp::sim
