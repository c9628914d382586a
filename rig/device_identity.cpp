#include "rig/device_identity.h"

#include <arpa/inet.h>
#include <fmt/format.h>
#include <netdb.h>
#include <netinet/in.h>
#include <sys/socket.h>

#include <algorithm>
#include <cstdlib>
#include <filesystem>
#include <vector>

namespace kp {
namespace {

std::string ResolvedHost(const std::string& host) {
  addrinfo hints{};
  hints.ai_family = AF_UNSPEC;
  hints.ai_socktype = SOCK_STREAM;
  addrinfo* res = nullptr;
  if (getaddrinfo(host.c_str(), nullptr, &hints, &res) != 0 || res == nullptr) return {};
  std::vector<std::string> found;
  bool loopback = false;
  for (addrinfo* a = res; a != nullptr; a = a->ai_next) {
    char buf[INET6_ADDRSTRLEN] = {};
    if (a->ai_family == AF_INET) {
      auto* in = reinterpret_cast<sockaddr_in*>(a->ai_addr);
      if ((ntohl(in->sin_addr.s_addr) >> 24) == 127) loopback = true;
      inet_ntop(AF_INET, &in->sin_addr, buf, sizeof buf);
    } else if (a->ai_family == AF_INET6) {
      auto* in6 = reinterpret_cast<sockaddr_in6*>(a->ai_addr);
      if (IN6_IS_ADDR_LOOPBACK(&in6->sin6_addr)) loopback = true;
      if (IN6_IS_ADDR_V4MAPPED(&in6->sin6_addr) && in6->sin6_addr.s6_addr[12] == 127) loopback = true;
      inet_ntop(AF_INET6, &in6->sin6_addr, buf, sizeof buf);
    } else {
      continue;
    }
    found.emplace_back(buf);
  }
  freeaddrinfo(res);
  if (loopback) return "loopback";
  if (found.empty()) return {};
  return *std::min_element(found.begin(), found.end());
}

}  // namespace

std::string DeviceIdentity(const Address& address) {
  switch (address.kind) {
    case Address::Kind::kTcp: {
      std::string host = ResolvedHost(address.host);
      return fmt::format("tcp:{}:{}", host.empty() ? address.host : host, address.port);
    }
    case Address::Kind::kSerial: {
      std::error_code ec;
      std::filesystem::path real = std::filesystem::canonical(address.path, ec);
      return "serial:" + (ec ? address.path : real.string());
    }
    case Address::Kind::kUsbtmc: {
      // One instrument however it is named: by its USB identity when given,
      // else by the device file the path leads to.
      if (address.path.empty())
        return fmt::format("usb:{:04x}:{:04x}:{}:{}", address.usb_vid, address.usb_pid, address.usb_serial, address.usb_interface);
      std::error_code ec;
      std::filesystem::path real = std::filesystem::canonical(address.path, ec);
      return "usbtmc:" + (ec ? address.path : real.string());
    }
    case Address::Kind::kVxi11: {
      std::string host = ResolvedHost(address.host);
      return fmt::format("vxi11:{}:{}", host.empty() ? address.host : host, address.vxi11_device);
    }
    case Address::Kind::kPty:
      break;
  }
  return address.text;
}

}  // namespace kp
