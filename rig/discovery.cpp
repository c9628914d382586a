#include "rig/discovery.h"

#include <algorithm>
#include <filesystem>
#include <mutex>

#include <fmt/format.h>
#include <lxi.h>

#include "drivers/data_dir.h"
#include "drivers/profile.h"
#include "drivers/scpi_session.h"

namespace kp {
namespace {

// lxi_discover reports through plain callbacks without a user pointer.
std::mutex g_lan_mu;
std::vector<FoundInstrument>* g_lan = nullptr;

void OnLanDevice(const char* address, const char* id) {
  if (g_lan == nullptr || address == nullptr) return;
  FoundInstrument f;
  f.kind = "lan";
  f.address = fmt::format("TCPIP0::{}::INSTR", address);
  f.path_address = fmt::format("vxi11:{}", address);
  f.description = "answered a VXI-11 broadcast";
  if (id != nullptr) {
    f.identity = id;
    while (!f.identity.empty() && (f.identity.back() == '\n' || f.identity.back() == '\r')) f.identity.pop_back();
    f.dialect = MatchingDialect(f.identity);
  }
  g_lan->push_back(std::move(f));
}

void OnBroadcast(const char*, const char*) {}

std::string TomlQuoted(const std::string& s) {
  std::string out = "\"";
  for (char c : s) {
    if (c == '"' || c == '\\') out += '\\';
    if (static_cast<unsigned char>(c) >= 0x20) out += c;
  }
  return out + "\"";
}

}  // namespace

std::vector<FoundInstrument> DiscoverLocal(const SysfsRoots& roots) {
  std::vector<FoundInstrument> out;
  for (const SerialPortKernelInfo& p : ListSerialPorts(roots)) {
    FoundInstrument f;
    f.kind = "serial";
    // A by-id name stays the same whichever order adapters are plugged in.
    f.address = "serial:" + (p.by_id.empty() ? p.path : p.by_id.front());
    f.path_address = "serial:" + p.path;
    f.description = DescribePortForPeople(p);
    for (size_t i = 1; i < p.by_id.size(); ++i) f.also.push_back(p.by_id[i]);
    if (!p.by_id.empty()) f.also.insert(f.also.begin(), p.path);
    out.push_back(std::move(f));
  }
  for (const UsbtmcDevice& d : ListUsbtmcDevices(roots)) {
    FoundInstrument f;
    f.kind = "usbtmc";
    // The USB resource string finds the instrument whatever number it gets.
    f.address = d.usb.serial.empty() ? "usbtmc:" + d.dev_path : UsbtmcResource(d);
    f.path_address = "usbtmc:" + d.dev_path;
    std::string name = d.usb.manufacturer;
    if (!d.usb.product.empty()) name += (name.empty() ? "" : " ") + d.usb.product;
    f.description = fmt::format("usb {:04x}:{:04x} {}{}", d.usb.vid, d.usb.pid, name,
                                d.usb.serial.empty() ? " (no serial number: addressed by path)" : "");
    out.push_back(std::move(f));
  }
  return out;
}

std::vector<FoundInstrument> DiscoverLan(Seconds timeout) {
  std::lock_guard<std::mutex> lock(g_lan_mu);
  std::vector<FoundInstrument> out;
  static std::once_flag init;
  std::call_once(init, [] { lxi_init(); });
  lxi_info_t info{};
  info.broadcast = &OnBroadcast;
  info.device = &OnLanDevice;
  g_lan = &out;
  lxi_discover(&info, std::max(1, static_cast<int>(timeout.count() * 1000.0)), DISCOVER_VXI11);
  g_lan = nullptr;
  return out;
}

std::string MatchingDialect(const std::string& idn) {
  namespace fs = std::filesystem;
  std::optional<fs::path> dir = DataSubdir("profiles");
  if (!dir || idn.empty()) return {};
  std::vector<fs::path> files;
  std::error_code ec;
  for (const fs::directory_entry& e : fs::directory_iterator(*dir, ec))
    if (IsDialectPath(e.path().string())) files.push_back(e.path());
  std::sort(files.begin(), files.end());
  for (const fs::path& f : files) {
    Result<InstrumentProfile> p = LoadProfileFile(f.string());
    if (!p.ok() || p->identity == "*") continue;
    if (IdentityMatches(p->identity, idn)) return f.stem().string();
  }
  return {};
}

void IdentifyInstrument(FoundInstrument& f, Seconds timeout, const StreamOptions& options, const std::string& serial_options) {
  if (!f.identity.empty()) return;
  std::string address = f.kind == "serial" && !serial_options.empty() ? f.path_address + "?" + serial_options
                        : f.path_address.empty()                    ? f.address
                                                                    : f.path_address;
  StreamOptions so = options;
  so.connect_timeout = timeout;
  Result<std::unique_ptr<Transport>> t = OpenTransport(address, so);
  if (!t.ok()) {
    f.error = t.status().message();
    return;
  }
  SteadyClock clock;
  ScpiOptions o;
  o.timeout = timeout;
  o.retries = 0;
  o.strict_framing = false;
  ScpiSession s(std::move(*t), clock, o);
  Result<std::string> idn = s.Identify();
  if (!idn.ok()) {
    f.error = idn.status().message();
    return;
  }
  f.identity = *idn;
  f.dialect = MatchingDialect(f.identity);
}

std::string RigFileLines(const FoundInstrument& f, const std::string& name) {
  std::string out = fmt::format("# {}\n", f.description);
  if (!f.identity.empty()) out += fmt::format("# *IDN? {}\n", f.identity);
  if (!f.error.empty()) out += fmt::format("# *IDN? not answered: {}\n", f.error);
  for (const std::string& a : f.also) out += fmt::format("#   also reachable as {}\n", a);
  out += "[[instrument]]\n";
  out += fmt::format("name = {}\n", TomlQuoted(name));
  out += fmt::format("address = {}\n", TomlQuoted(f.address));
  std::string roles = "\"load\"";
  if (!f.dialect.empty()) {
    out += fmt::format("profile = {}\n", TomlQuoted(f.dialect));
    if (std::optional<std::filesystem::path> dir = DataSubdir("profiles")) {
      Result<InstrumentProfile> p = LoadProfileFile((*dir / (f.dialect + kDialectExtension)).string());
      if (p.ok()) {
        roles.clear();
        for (const std::string& r : p->roles) roles += (roles.empty() ? "\"" : ", \"") + r + "\"";
      }
    }
  } else {
    out += "profile = \"generic-scpi-load\"  # no shipped dialect knows this identity: choose or write one\n";
  }
  out += fmt::format("roles = [{}]{}\n", roles,
                     roles.find(',') != std::string::npos ? "  # keep the roles this instrument plays on your bench" : "");
  return out;
}

}  // namespace kp
