#include "drivers/visa_address.h"

#include <cctype>
#include <charconv>
#include <string>
#include <vector>

#include <fmt/format.h>

namespace kp {
namespace {

std::string Upper(std::string_view s) {
  std::string out(s);
  for (char& c : out) c = static_cast<char>(std::toupper(static_cast<unsigned char>(c)));
  return out;
}

bool StartsWithNoCase(std::string_view s, std::string_view prefix) {
  return s.size() >= prefix.size() && Upper(s.substr(0, prefix.size())) == prefix;
}

bool AllDigits(std::string_view s) {
  for (char c : s)
    if (c < '0' || c > '9') return false;
  return true;
}

// Splits at "::", keeping an IPv6 literal in brackets whole.
std::vector<std::string_view> SplitParts(std::string_view s) {
  std::vector<std::string_view> parts;
  size_t start = 0;
  int depth = 0;
  for (size_t i = 0; i < s.size(); ++i) {
    if (s[i] == '[') ++depth;
    if (s[i] == ']' && depth > 0) --depth;
    if (depth == 0 && s[i] == ':' && i + 1 < s.size() && s[i + 1] == ':') {
      parts.push_back(s.substr(start, i - start));
      start = i + 2;
      ++i;
    }
  }
  parts.push_back(s.substr(start));
  return parts;
}

constexpr const char* kVisaForms =
    "VISA resources read here: TCPIP[n]::HOST::PORT::SOCKET, TCPIP[n]::HOST[::DEVICE]::INSTR (VXI-11), "
    "ASRL/dev/PATH::INSTR, ASRLn::INSTR, USB[n]::VID::PID::SERIAL[::INTERFACE]::INSTR";

Status Bad(std::string_view text, std::string_view why) {
  return InvalidInput(fmt::format("address '{}': {}", text, why));
}

// A USB id: 0x-hex (as VISA prints it) or decimal, 0..0xFFFF.
bool ParseUsbId(std::string_view s, int& out) {
  int base = 10;
  if (s.size() > 2 && s[0] == '0' && (s[1] == 'x' || s[1] == 'X')) {
    s.remove_prefix(2);
    base = 16;
  }
  if (s.empty()) return false;
  auto [p, ec] = std::from_chars(s.data(), s.data() + s.size(), out, base);
  return ec == std::errc() && p == s.data() + s.size() && out >= 0 && out <= 0xFFFF;
}

// Strips the board number after a keyword ("TCPIP0" -> ok); false when what
// follows the keyword is not digits.
bool BoardOk(std::string_view word, size_t keyword_len) { return AllDigits(word.substr(keyword_len)); }

Status ParseHost(std::string_view text, std::string_view host, Address& a) {
  if (host.empty()) return Bad(text, "the host is empty");
  if (host.front() == '[') {
    if (host.back() != ']' || host.size() < 3) return Bad(text, "an IPv6 host goes in brackets, as in TCPIP0::[2001:db8::7]::INSTR");
    a.host = std::string(host.substr(1, host.size() - 2));
    return Status::Ok();
  }
  for (char c : host)
    if (!(std::isalnum(static_cast<unsigned char>(c)) || c == '.' || c == '-' || c == '_'))
      return Bad(text, fmt::format("'{}' is not a host name or address (an IPv6 address goes in brackets)", host));
  a.host = std::string(host);
  return Status::Ok();
}

Status ParseTcpip(std::string_view text, const std::vector<std::string_view>& p, Address& a) {
  if (p.size() < 2) return Bad(text, "TCPIP needs a host, as in TCPIP0::192.0.2.7::INSTR");
  KP_RETURN_IF_ERROR(ParseHost(text, p[1], a));
  std::string last = p.size() > 2 ? Upper(p.back()) : "INSTR";
  if (last == "SOCKET") {
    if (p.size() != 4) return Bad(text, "a SOCKET resource is TCPIP[n]::HOST::PORT::SOCKET");
    int port = 0;
    auto [q, ec] = std::from_chars(p[2].data(), p[2].data() + p[2].size(), port);
    if (ec != std::errc() || q != p[2].data() + p[2].size() || p[2].empty() || port < 1 || port > 65535)
      return Bad(text, fmt::format("port '{}' must be a whole number 1..65535", p[2]));
    a.kind = Address::Kind::kTcp;
    a.port = port;
    return Status::Ok();
  }
  // INSTR, written or implied: TCPIP::HOST[::DEVICE][::INSTR].
  size_t n = p.size();
  if (n > 2 && last == "INSTR") --n;
  if (n > 3) return Bad(text, fmt::format("too many parts for a TCPIP resource ({})", kVisaForms));
  a.kind = Address::Kind::kVxi11;
  if (n == 3) {
    std::string_view device = p[2];
    if (device.empty()) return Bad(text, "the device name between '::' is empty (inst0 is the usual one)");
    if (StartsWithNoCase(device, "HISLIP"))
      return Bad(text, "HiSLIP is not supported; use the instrument's VXI-11 name (TCPIP0::HOST::inst0::INSTR) or its "
                       "raw socket (TCPIP0::HOST::5025::SOCKET)");
    if (AllDigits(device))
      return Bad(text, fmt::format("'{}' looks like a port: a raw socket is TCPIP0::HOST::{}::SOCKET", device, device));
    for (char c : device)
      if (!(std::isalnum(static_cast<unsigned char>(c)) || c == ',' || c == '_' || c == '.' || c == '-'))
        return Bad(text, fmt::format("'{}' is not a VXI-11 device name (such as inst0 or gpib0,5)", device));
    a.vxi11_device = std::string(device);
  }
  return Status::Ok();
}

Status ParseAsrl(std::string_view text, const std::vector<std::string_view>& p, Address& a) {
  std::string_view word = p[0];
  if (p.size() > 2 || (p.size() == 2 && Upper(p[1]) != "INSTR"))
    return Bad(text, "a serial resource is ASRL/dev/PATH::INSTR or ASRLn::INSTR");
  a.kind = Address::Kind::kSerial;
  std::string_view rest = word.substr(4);
  if (rest.starts_with("/")) {
    a.path = std::string(rest);
    return Status::Ok();
  }
  if (rest.empty() || !AllDigits(rest) || rest.size() > 3)
    return Bad(text, "ASRL is followed by a port number (ASRL1::INSTR) or a device path (ASRL/dev/ttyUSB0::INSTR)");
  int n = std::stoi(std::string(rest));
  if (n < 1) return Bad(text, "serial ports are numbered from ASRL1 (= /dev/ttyS0)");
  // ASRL1 is the first built-in port, /dev/ttyS0 (NI-VISA's numbering on
  // Linux; from memory). Adapters are better named by path.
  a.path = fmt::format("/dev/ttyS{}", n - 1);
  return Status::Ok();
}

Status ParseUsb(std::string_view text, const std::vector<std::string_view>& p, Address& a) {
  if (!BoardOk(p[0], 3)) return Bad(text, fmt::format("'{}' is not USB or USBn", p[0]));
  size_t n = p.size();
  std::string last = Upper(p.back());
  if (last == "RAW") return Bad(text, "USB ::RAW resources are not supported; a USB-TMC instrument is ...::INSTR");
  if (last == "INSTR") --n;
  if (n < 4 || n > 5) return Bad(text, "a USB resource is USB[n]::VID::PID::SERIAL[::INTERFACE]::INSTR");
  if (!ParseUsbId(p[1], a.usb_vid)) return Bad(text, fmt::format("vendor id '{}' must be 0x0000..0xFFFF (hex with 0x, or decimal)", p[1]));
  if (!ParseUsbId(p[2], a.usb_pid)) return Bad(text, fmt::format("product id '{}' must be 0x0000..0xFFFF (hex with 0x, or decimal)", p[2]));
  if (p[3].empty()) return Bad(text, "the serial number is empty");
  a.usb_serial = std::string(p[3]);
  if (n == 5) {
    if (p[4].empty() || !AllDigits(p[4]) || p[4].size() > 3) return Bad(text, fmt::format("interface '{}' must be a whole number", p[4]));
    a.usb_interface = std::stoi(std::string(p[4]));
  }
  a.kind = Address::Kind::kUsbtmc;
  a.path.clear();
  return Status::Ok();
}

}  // namespace

bool LooksLikeVisaResource(std::string_view head) {
  if (StartsWithNoCase(head, "ASRL/")) return true;
  if (head.find("::") == std::string_view::npos) return false;
  for (std::string_view k : {"TCPIP", "ASRL", "USB", "GPIB", "PXI", "VXI"})
    if (StartsWithNoCase(head, k)) return true;
  return false;
}

Status ParseVisaResource(std::string_view text, Address& a) {
  std::vector<std::string_view> p = SplitParts(text);
  std::string_view word = p[0];
  if (StartsWithNoCase(word, "TCPIP")) {
    if (!BoardOk(word, 5)) return Bad(text, fmt::format("'{}' is not TCPIP or TCPIPn", word));
    return ParseTcpip(text, p, a);
  }
  if (StartsWithNoCase(word, "ASRL")) return ParseAsrl(text, p, a);
  if (StartsWithNoCase(word, "USB")) return ParseUsb(text, p, a);
  return Bad(text, fmt::format("'{}' resources are not supported ({})", word.substr(0, word.find_first_of("0123456789")), kVisaForms));
}

}  // namespace kp
