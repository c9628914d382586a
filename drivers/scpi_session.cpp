#include "drivers/scpi_session.h"

#include <cctype>

#include <fmt/format.h>

#include <functional>

namespace kp {

ScpiSession::ScpiSession(std::unique_ptr<Transport> transport, Clock& clock, ScpiOptions options)
    : transport_(std::move(transport)), clock_(clock), options_(options), address_(transport_->Address()) {}

void ScpiSession::Trace(char direction, std::string_view text) {
  if (trace_) trace_(clock_.Now(), direction, address_, text);
}

Status ScpiSession::Send(std::string_view line) {
  Trace('>', line);
  Status st = transport_->WriteLine(line);
  if (!st.ok()) Trace('!', st.ToString());
  return st;
}

Status ScpiSession::ResyncWithMarker(std::string_view why) {
  ++resync_count_;
  Trace('!', fmt::format("resynchronising: {}", why));
  transport_->Flush();
  KP_RETURN_IF_ERROR(Send("*CLS"));
  KP_RETURN_IF_ERROR(Send("*OPC?"));
  // Bounded: a device that chatters forever is not waited for.
  for (int i = 0; i < 16; ++i) {
    Result<std::string> line = transport_->ReadLine(options_.timeout);
    if (!line.ok()) {
      Trace('!', "resync: " + line.status().ToString());
      return line.status();
    }
    std::string_view l = *line;
    while (!l.empty() && (l.back() == ' ' || l.back() == '\r')) l.remove_suffix(1);
    while (!l.empty() && (l.front() == ' ' || l.front() == '+')) l.remove_prefix(1);
    if (l == "1") {
      Trace('<', *line);
      transport_->Flush();  // whatever already follows the marker is stray too
      return Status::Ok();
    }
    Trace('!', fmt::format("discarded late reply '{}' (input nobody asked for, before the resync marker)", *line));
  }
  return ProtocolError("no '1' from '*OPC?' while resynchronising (the instrument keeps sending)");
}

Status ScpiSession::CheckQuiet(std::string_view before) {
  if (!options_.strict_framing || !transport_->HasUnreadInput()) return Status::Ok();
  return ResyncWithMarker(fmt::format("unasked input waiting before '{}'", before));
}

void ScpiSession::Resync(const Status& last) {
  if (options_.strict_framing && last.code() != StatusCode::kIo) {
    // A reply with company, unread input, or a timeout on a link where a late
    // reply may still be on its way (late_reply > 0: rig files set it): the
    // marker puts whatever came or comes late behind us. An in-process device
    // answers only when written to, so there a late reply shows up as input
    // nobody asked for and is caught by the checks around each exchange.
    if (last.code() != StatusCode::kTimeout || options_.late_reply.count() > 0 || transport_->HasUnreadInput()) {
      (void)ResyncWithMarker(fmt::format("after: {}", last.ToString()));
      return;
    }
  }
  if (last.code() == StatusCode::kTimeout && options_.late_reply.count() > 0) {
    Result<std::string> late = transport_->ReadLine(options_.late_reply);
    if (late.ok()) Trace('!', fmt::format("discarded late reply '{}'", *late));
  }
  transport_->Flush();
}

Status ScpiSession::Retrying(std::string_view what, bool retry_protocol, const std::function<Status()>& once) {
  Status last;
  for (int attempt = 0; attempt <= options_.retries; ++attempt) {
    if (attempt > 0) {
      ++retry_count_;
      Trace('!', fmt::format("retry {} of '{}' after: {}", attempt, what, last.ToString()));
      Resync(last);
      if (last.code() == StatusCode::kIo) {
        if (Status rc = transport_->Reconnect(); !rc.ok()) {
          last = rc;
          continue;
        }
      }
    }
    last = once();
    if (last.ok()) return last;
    bool retryable = last.code() == StatusCode::kTimeout || last.code() == StatusCode::kIo ||
                     (retry_protocol && last.code() == StatusCode::kProtocol);
    if (!retryable) break;
  }
  return last.WithContext(fmt::format("{} '{}'", address_, what));
}

Status ScpiSession::Write(std::string_view command) {
  KP_RETURN_IF_ERROR(WriteOnce(command));
  if (!options_.check_settings || command.find('?') != std::string_view::npos || command.starts_with("*CLS")) return Status::Ok();
  // The dialect asks for the error queue after every setting: whatever the
  // instrument queued now was caused by this command.
  Status queued = DrainErrors();
  if (queued.code() == StatusCode::kInstrumentError) {
    std::string what = queued.message();
    if (size_t at = what.find(" reported "); at != std::string::npos) what.erase(0, at + 10);
    Status refused = InstrumentError(fmt::format("{} refused '{}': {}", address_, command, what));
    Trace('!', refused.message());
    return refused;
  }
  return queued;
}

Status ScpiSession::WriteOnce(std::string_view command) {
  return Retrying(command, /*retry_protocol=*/true, [&]() -> Status {
    KP_RETURN_IF_ERROR(CheckQuiet(command));
    KP_RETURN_IF_ERROR(Send(command));
    if (!options_.confirm_writes) return Status::Ok();
    KP_RETURN_IF_ERROR(Send("*OPC?"));
    Result<std::string> reply = transport_->ReadLine(options_.timeout);
    if (!reply.ok()) {
      Trace('!', reply.status().ToString());
      return reply.status();
    }
    Trace('<', *reply);
    Result<ScpiNumber> n = ParseScpiNumber(*reply);
    if (!n.ok() || !n->finite() || n->value != 1.0) {
      Status bad = ProtocolError(fmt::format("'*OPC?' after '{}' replied '{}', expected 1", command, *reply));
      Trace('!', bad.message());
      return bad;
    }
    return Status::Ok();
  });
}

Result<std::string> ScpiSession::Query(std::string_view query) {
  std::string line;
  // Under strict framing a reply with company (a second line right behind
  // it) is not trusted: the exchange is resynchronised and repeated.
  Status st = Retrying(query, /*retry_protocol=*/options_.strict_framing, [&]() -> Status {
    KP_RETURN_IF_ERROR(CheckQuiet(query));
    KP_RETURN_IF_ERROR(Send(query));
    Result<std::string> reply = transport_->ReadLine(options_.timeout);
    if (!reply.ok()) {
      Trace('!', reply.status().ToString());
      return reply.status();
    }
    Trace('<', *reply);
    if (options_.strict_framing && transport_->HasUnreadInput()) {
      Status bad = ProtocolError(fmt::format("'{}' was answered by more than one line; reply '{}' not used", query, *reply));
      Trace('!', bad.message());
      return bad;
    }
    line = std::move(*reply);
    return Status::Ok();
  });
  if (!st.ok()) return st;
  return line;
}

Result<ScpiNumber> ScpiSession::QueryNumber(std::string_view query) {
  Status last;
  for (int attempt = 0; attempt <= options_.retries; ++attempt) {
    Result<std::string> reply = Query(query);
    if (!reply.ok()) return reply.status();
    Result<ScpiNumber> n = ParseScpiNumber(options_.strip_units ? StripReplyUnit(*reply) : std::string_view(*reply));
    if (n.ok()) return n;
    // A garbled line is retried like a lost one: the next reply is usually clean.
    last = n.status();
    ++retry_count_;
    Trace('!', last.ToString());
    transport_->Flush();
  }
  return last.WithContext(fmt::format("{} '{}'", address_, query));
}

Status ScpiSession::WaitComplete() {
  KP_ASSIGN_OR_RETURN(std::string reply, Query("*OPC?"));
  KP_ASSIGN_OR_RETURN(ScpiNumber n, ParseScpiNumber(reply));
  if (!n.finite() || n.value != 1.0) return ProtocolError(fmt::format("{} '*OPC?' replied '{}', expected 1", address_, reply));
  return Status::Ok();
}

std::string_view StripReplyUnit(std::string_view reply) {
  std::string_view r = reply;
  auto unit_byte = [](unsigned char c) {
    // Letters, blanks, and the UTF-8 bytes of ° (C2 B0) and Ω (CE A9).
    return std::isalpha(c) || c == ' ' || c == '\t' || c == 0xC2 || c == 0xB0 || c == 0xCE || c == 0xA9;
  };
  while (!r.empty() && unit_byte(static_cast<unsigned char>(r.back()))) r.remove_suffix(1);
  if (r.size() == reply.size() || r.empty()) return reply;
  char last = r.back();
  if (!((last >= '0' && last <= '9') || last == '.')) return reply;
  // Only base units: a prefixed one ("2.5 mV", "1.2 kOhm") would change the
  // value, and kelvin is not Celsius, so those stay and fail as numbers.
  std::string unit;
  for (char c : reply.substr(r.size()))
    if (c != ' ' && c != '\t') unit += static_cast<char>(std::toupper(static_cast<unsigned char>(c)));
  static const char* const kBaseUnits[] = {"V", "VDC", "VOLT", "VOLTS", "A", "ADC", "AMP", "AMPS", "W", "WATT", "WATTS", "C",
                                           "\xC2\xB0\x43" /* degree sign, C */, "DEGC", "CEL", "OHM", "OHMS", "\xCE\xA9"};
  for (const char* u : kBaseUnits)
    if (unit == u) return r;
  return reply;
}

Status ScpiSession::DrainErrors() {
  if (!options_.error_queue) return Status::Ok();
  std::vector<std::string> entries;
  for (int i = 0; i < options_.max_error_drain; ++i) {
    KP_ASSIGN_OR_RETURN(std::string reply, Query(options_.error_query));
    // Replies look like  0,"No error"  or  -113,"Undefined header"  (SCPI-99).
    size_t comma = reply.find(',');
    Result<ScpiNumber> code = ParseScpiNumber(reply.substr(0, comma));
    if (!code.ok() || !code->finite())
      return ProtocolError(fmt::format("{} '{}' replied '{}'", address_, options_.error_query, reply));
    if (code->value == 0) break;
    entries.push_back(reply);
  }
  if (entries.empty()) return Status::Ok();
  std::string joined;
  for (const auto& e : entries) joined += (joined.empty() ? "" : "; ") + e;
  return InstrumentError(fmt::format("{} reported {}", address_, joined));
}

}  // namespace kp
