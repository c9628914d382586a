#include "drivers/address.h"

#include <algorithm>
#include <cctype>
#include <charconv>

#include <fmt/format.h>

#include "drivers/visa_address.h"

namespace kp {
namespace {

constexpr const char* kForms =
    "expected tcp:HOST:PORT (or HOST:PORT; IPv6 as tcp:[::1]:5025), serial:PATH?baud=N&parity=none&data=8&stop=1&flow=none&eol=lf "
    "(or a bare device path such as /dev/ttyUSB0), usbtmc:/dev/usbtmcN, vxi11:HOST[:DEVICE], a VISA resource string "
    "(TCPIP0::HOST::5025::SOCKET, TCPIP0::HOST::INSTR, ASRL/dev/ttyUSB0::INSTR, USB0::VID::PID::SERIAL::INSTR), or pty";

bool IsUsbtmcPath(std::string_view path) { return path.starts_with("/dev/usbtmc"); }

Result<int> ParseInt(std::string_view text, std::string_view what, const std::string& address) {
  int v = 0;
  auto [p, ec] = std::from_chars(text.data(), text.data() + text.size(), v);
  if (ec != std::errc() || p != text.data() + text.size() || text.empty())
    return InvalidInput(fmt::format("address '{}': {} '{}' is not a whole number", address, what, text));
  return v;
}

Status ParseEol(std::string_view v, Address& a) {
  if (v == "lf") a.eol = "\n";
  else if (v == "crlf") a.eol = "\r\n";
  else if (v == "cr") a.eol = "\r";
  else return InvalidInput(fmt::format("address '{}': eol '{}' must be lf, crlf or cr", a.text, v));
  return Status::Ok();
}

Status ParseOption(std::string_view key, std::string_view v, Address& a) {
  const std::string& t = a.text;
  if (key == "eol") return ParseEol(v, a);
  if (a.kind != Address::Kind::kSerial)
    return InvalidInput(fmt::format("address '{}': option '{}' applies to serial ports only (tcp, usbtmc and vxi11 take eol)", t, key));
  SerialSettings& s = a.serial;
  if (key == "baud") {
    KP_ASSIGN_OR_RETURN(s.baud, ParseInt(v, "baud", t));
    if (s.baud < 50 || s.baud > 4000000) return InvalidInput(fmt::format("address '{}': baud {} is out of range 50..4000000", t, s.baud));
  } else if (key == "data") {
    KP_ASSIGN_OR_RETURN(s.data_bits, ParseInt(v, "data", t));
    if (s.data_bits < 5 || s.data_bits > 8) return InvalidInput(fmt::format("address '{}': data must be 5..8 bits", t));
  } else if (key == "stop") {
    KP_ASSIGN_OR_RETURN(s.stop_bits, ParseInt(v, "stop", t));
    if (s.stop_bits != 1 && s.stop_bits != 2) return InvalidInput(fmt::format("address '{}': stop must be 1 or 2", t));
  } else if (key == "parity") {
    if (v == "none") s.parity = Parity::kNone;
    else if (v == "odd") s.parity = Parity::kOdd;
    else if (v == "even") s.parity = Parity::kEven;
    else return InvalidInput(fmt::format("address '{}': parity '{}' must be none, odd or even", t, v));
  } else if (key == "flow") {
    if (v == "none") s.flow = FlowControl::kNone;
    else if (v == "rtscts") s.flow = FlowControl::kRtsCts;
    else if (v == "xonxoff") s.flow = FlowControl::kXonXoff;
    else return InvalidInput(fmt::format("address '{}': flow '{}' must be none, rtscts or xonxoff", t, v));
  } else {
    return InvalidInput(fmt::format("address '{}': unknown option '{}' (baud, data, parity, stop, flow, eol)", t, key));
  }
  return Status::Ok();
}

Status ParseQuery(std::string_view query, Address& a) {
  while (!query.empty()) {
    size_t amp = query.find('&');
    std::string_view item = query.substr(0, amp);
    query = amp == std::string_view::npos ? std::string_view() : query.substr(amp + 1);
    size_t eq = item.find('=');
    if (eq == std::string_view::npos || eq == 0)
      return InvalidInput(fmt::format("address '{}': option '{}' must be KEY=VALUE", a.text, item));
    KP_RETURN_IF_ERROR(ParseOption(item.substr(0, eq), item.substr(eq + 1), a));
  }
  return Status::Ok();
}


std::string HostForAddress(const std::string& host) {
  return host.find(':') != std::string::npos ? "[" + host + "]" : host;
}

// HOST:PORT with HOST a name, an IPv4 address or an IPv6 literal in brackets.
Status ParseHostPort(std::string_view rest, std::string_view text, Address& a) {
  std::string_view port_text;
  if (rest.starts_with("[")) {
    size_t close = rest.find(']');
    if (close == std::string_view::npos)
      return InvalidInput(fmt::format("address '{}': IPv6 literal without its closing ']' (as in tcp:[::1]:5025)", text));
    a.host = std::string(rest.substr(1, close - 1));
    if (a.host.empty()) return InvalidInput(fmt::format("address '{}': empty host between '[' and ']'", text));
    if (close + 1 >= rest.size() || rest[close + 1] != ':')
      return InvalidInput(fmt::format("address '{}': expected ':PORT' after ']' (as in tcp:[::1]:5025)", text));
    port_text = rest.substr(close + 2);
  } else {
    size_t colon = rest.rfind(':');
    if (colon == std::string_view::npos || colon == 0)
      return InvalidInput(fmt::format("address '{}': {}", text, kForms));
    a.host = std::string(rest.substr(0, colon));
    if (a.host.find(':') != std::string::npos)
      return InvalidInput(fmt::format("address '{}': an IPv6 address goes in brackets, as in tcp:[{}]:{}", text, a.host,
                                      rest.substr(colon + 1)));
    port_text = rest.substr(colon + 1);
  }
  KP_ASSIGN_OR_RETURN(a.port, ParseInt(port_text, "port", a.text));
  if (a.port < 0 || a.port > 65535) return InvalidInput(fmt::format("address '{}': port must be 0..65535", text));
  return Status::Ok();
}

// vxi11:HOST[:DEVICE], HOST an IPv6 literal in brackets or a name/IPv4 address.
Status ParseVxi11(std::string_view rest, std::string_view text, Address& a) {
  std::string_view device;
  if (rest.starts_with("[")) {
    size_t close = rest.find(']');
    if (close == std::string_view::npos || close == 1)
      return InvalidInput(fmt::format("address '{}': an IPv6 host goes in brackets, as in vxi11:[2001:db8::7]", text));
    a.host = std::string(rest.substr(1, close - 1));
    std::string_view after = rest.substr(close + 1);
    if (!after.empty() && after.front() != ':')
      return InvalidInput(fmt::format("address '{}': expected ':DEVICE' after ']'", text));
    if (!after.empty()) device = after.substr(1);
  } else {
    size_t colon = rest.find(':');
    a.host = std::string(rest.substr(0, colon));
    if (colon != std::string_view::npos) device = rest.substr(colon + 1);
    if (device.find(':') != std::string_view::npos)
      return InvalidInput(fmt::format("address '{}': an IPv6 host goes in brackets, as in vxi11:[2001:db8::7]", text));
  }
  if (a.host.empty()) return InvalidInput(fmt::format("address '{}': vxi11 needs a host, as in vxi11:192.0.2.7", text));
  if (rest.find(':') != std::string_view::npos && !rest.starts_with("[") && device.empty())
    return InvalidInput(fmt::format("address '{}': empty device name after ':' (inst0 is the usual one)", text));
  if (!device.empty()) {
    if (std::all_of(device.begin(), device.end(), [](char c) { return c >= '0' && c <= '9'; }))
      return InvalidInput(fmt::format("address '{}': '{}' looks like a port; VXI-11 finds its port by itself (a raw socket is tcp:HOST:PORT)",
                                      text, device));
    a.vxi11_device = std::string(device);
  }
  return Status::Ok();
}

// "host:5025" (a name or IPv4 address and a port, nothing else): TCP.
bool LooksLikeHostPort(std::string_view head) {
  if (head.starts_with("[")) return head.find("]:") != std::string_view::npos;
  size_t colon = head.rfind(':');
  if (colon == std::string_view::npos || colon == 0 || colon + 1 == head.size()) return false;
  for (char c : head.substr(colon + 1))
    if (c < '0' || c > '9') return false;
  for (char c : head.substr(0, colon))
    if (!(std::isalnum(static_cast<unsigned char>(c)) || c == '.' || c == '-' || c == '_')) return false;
  return true;
}

}  // namespace

std::string EolName(const std::string& eol) {
  if (eol == "\r\n") return "crlf";
  if (eol == "\r") return "cr";
  return "lf";
}

std::string FormatTcpAddress(const std::string& host, int port) {
  return fmt::format("tcp:{}:{}", HostForAddress(host), port);
}

Result<Address> ParseAddress(std::string_view text) {
  Address a;
  a.text = std::string(text);
  size_t q = text.find('?');
  std::string_view head = text.substr(0, q);
  std::string_view query = q == std::string_view::npos ? std::string_view() : text.substr(q + 1);
  if (head == "pty") {
    a.kind = Address::Kind::kPty;
  } else if (head.starts_with("tcp:")) {
    a.kind = Address::Kind::kTcp;
    KP_RETURN_IF_ERROR(ParseHostPort(head.substr(4), text, a));
  } else if (head.starts_with("serial:")) {
    a.kind = Address::Kind::kSerial;
    a.path = std::string(head.substr(7));
    if (a.path.empty()) return InvalidInput(fmt::format("address '{}': serial needs a device path", text));
    if (IsUsbtmcPath(a.path))
      return InvalidInput(fmt::format("address '{}': {} is a USB-TMC device, not a serial port: write usbtmc:{}", text, a.path, a.path));
  } else if (head.starts_with("usbtmc:")) {
    a.kind = Address::Kind::kUsbtmc;
    a.path = std::string(head.substr(7));
    if (a.path.empty() || a.path.front() != '/')
      return InvalidInput(fmt::format("address '{}': usbtmc needs a device path, as in usbtmc:/dev/usbtmc0", text));
  } else if (head.starts_with("vxi11:")) {
    a.kind = Address::Kind::kVxi11;
    KP_RETURN_IF_ERROR(ParseVxi11(head.substr(6), text, a));
  } else if (head.starts_with("/")) {
    // A bare device path: a serial port with the default settings, or a
    // USB-TMC device by its name.
    a.kind = IsUsbtmcPath(head) ? Address::Kind::kUsbtmc : Address::Kind::kSerial;
    a.path = std::string(head);
  } else if (LooksLikeVisaResource(head)) {
    KP_RETURN_IF_ERROR(ParseVisaResource(head, a));
  } else if (LooksLikeHostPort(head)) {
    a.kind = Address::Kind::kTcp;
    KP_RETURN_IF_ERROR(ParseHostPort(head, text, a));
  } else {
    return InvalidInput(fmt::format("address '{}': {}", text, kForms));
  }
  KP_RETURN_IF_ERROR(ParseQuery(query, a));
  return a;
}

}  // namespace kp
