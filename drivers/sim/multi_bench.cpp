#include "drivers/sim/multi_bench.h"

#include <fmt/format.h>

#include <atomic>
#include <cctype>
#include <deque>

#include "drivers/scpi_syntax.h"

namespace kp::sim {

std::vector<CellParams> BatchCells(const CellParams& nominal, const CellSpread& spread, int n, uint64_t seed) {
  std::vector<CellParams> cells;
  for (int i = 0; i < n; ++i) {
    CellParams c = seed == 0 ? nominal : VaryCell(nominal, spread, seed + static_cast<uint64_t>(i) + 1);
    c.name = fmt::format("{}-{}", nominal.name, i + 1);
    cells.push_back(std::move(c));
  }
  return cells;
}

namespace {

std::string_view TrimView(std::string_view s) {
  while (!s.empty() && std::isspace(static_cast<unsigned char>(s.front()))) s.remove_prefix(1);
  while (!s.empty() && std::isspace(static_cast<unsigned char>(s.back()))) s.remove_suffix(1);
  return s;
}

// Case-insensitive: does `line` start with `word` followed by a blank, '?' or its end.
bool StartsWithWord(std::string_view line, std::string_view word) {
  if (line.size() < word.size()) return false;
  for (size_t i = 0; i < word.size(); ++i)
    if (std::toupper(static_cast<unsigned char>(line[i])) != word[i]) return false;
  return line.size() == word.size() || line[word.size()] == ' ' || line[word.size()] == '\t' || line[word.size()] == '?';
}

}  // namespace

class SimMultiBench::Router final : public LineDevice {
 public:
  enum class Role { kLoad, kMeter, kThermometer, kSupply };
  Router(SimMultiBench& bench, Role role) : bench_(bench), role_(role) {}

  std::optional<std::string> HandleLine(std::string_view raw) override {
    std::string_view line = TrimView(raw);
    std::unique_lock<std::mutex> lk(mu_);
    // The instrument's own answers.
    if (StartsWithWord(line, "*IDN")) return Identity();
    for (const char* sel : {"INST:NSEL", "INSTRUMENT:NSELECT", "INST:NSELECT", "INSTRUMENT:NSEL"}) {
      if (!StartsWithWord(line, sel)) continue;
      std::string_view rest = TrimView(line.substr(std::string_view(sel).size()));
      if (!rest.empty() && rest.front() == '?') return std::to_string(selected_);
      Result<ScpiNumber> n = ParseScpiNumber(rest);
      if (!n.ok() || !n->finite() || n->value != static_cast<int>(n->value) || !Valid(static_cast<int>(n->value))) {
        Error("-222,\"Data out of range\"");
        return std::nullopt;
      }
      selected_ = static_cast<int>(n->value);
      ++selects_;
      return std::nullopt;
    }
    // One error queue for the whole instrument: its own entries first, then
    // each channel's in turn.
    if (StartsWithWord(line, "SYST:ERR") || StartsWithWord(line, "SYSTEM:ERROR")) {
      if (!errors_.empty()) {
        std::string e = errors_.front();
        errors_.pop_front();
        return e;
      }
      lk.unlock();
      for (int c = 1; c <= bench_.channels(); ++c) {
        std::optional<std::string> e = Device(c).HandleLine("SYST:ERR?");
        if (e && !e->starts_with("0,") && !e->starts_with("+0,")) return e;
      }
      return std::string("0,\"No error\"");
    }
    // Instrument-wide common commands reach every channel.
    if (StartsWithWord(line, "*CLS") || StartsWithWord(line, "*RST")) {
      errors_.clear();
      lk.unlock();
      for (int c = 1; c <= bench_.channels(); ++c) (void)Device(c).HandleLine(line);
      return std::nullopt;
    }
    // A channel list at the end: "(@3)".
    int channel = selected_;
    std::string command(line);
    size_t at = command.rfind("(@");
    if (at != std::string::npos && command.back() == ')') {
      std::string_view list = std::string_view(command).substr(at + 2, command.size() - at - 3);
      Result<ScpiNumber> n = ParseScpiNumber(list);
      if (!n.ok() || !n->finite() || n->value != static_cast<int>(n->value) || !Valid(static_cast<int>(n->value))) {
        Error("-222,\"Data out of range\"");
        return role_ == Role::kLoad || role_ == Role::kSupply || command.find('?') == std::string::npos
                   ? std::nullopt
                   : std::optional<std::string>("9.91E37");
      }
      channel = static_cast<int>(n->value);
      command.erase(at);
      while (!command.empty() && (command.back() == ' ' || command.back() == ',')) command.pop_back();
    }
    lk.unlock();
    if (channel == 0) return Enclosure(command);
    return Device(channel).HandleLine(command);
  }

  long selects() const { return selects_.load(); }

 private:
  LineDevice& Device(int channel) {
    SimBench& b = bench_.channel(channel);
    switch (role_) {
      case Role::kLoad: return b.load();
      case Role::kMeter: return b.meter();
      case Role::kThermometer: return b.thermometer();
      case Role::kSupply: return b.supply();
    }
    return b.load();
  }
  bool Valid(int ch) const { return (ch >= 1 && ch <= bench_.channels()) || (ch == 0 && role_ == Role::kThermometer); }
  void Error(std::string e) {
    if (errors_.size() < 10) errors_.push_back(std::move(e));
  }
  std::string Identity() const {
    const char* model = role_ == Role::kLoad ? "KP-SIM-MLOAD" : role_ == Role::kMeter ? "KP-SIM-MSCAN"
                        : role_ == Role::kThermometer ? "KP-SIM-MTEMP" : "KP-SIM-MSUPPLY";
    return fmt::format("Kneepoint Simulation,{}-{},SN0100,1.0", model, bench_.channels());
  }
  // Channel 0 of the thermometer: the enclosure probe.
  std::optional<std::string> Enclosure(const std::string& command) {
    if (command.find('?') == std::string::npos) return std::nullopt;
    if (StartsWithWord(command, "MEAS:TEMP") || StartsWithWord(command, "MEASURE:TEMPERATURE"))
      return FormatNr3(bench_.enclosure_c());
    if (StartsWithWord(command, "*OPC")) return std::string("1");
    if (StartsWithWord(command, "SYST:ERR")) return std::string("0,\"No error\"");
    return std::string("9.91E37");
  }

  SimMultiBench& bench_;
  Role role_;
  std::mutex mu_;
  int selected_ = 1;
  std::deque<std::string> errors_;
  std::atomic<long> selects_{0};
};

SimMultiBench::SimMultiBench(std::vector<CellParams> cells, Clock& clock, SimOptions options) {
  for (size_t i = 0; i < cells.size(); ++i) {
    SimOptions o = options;
    o.seed = options.seed + i;  // independent meter noise per channel
    benches_.push_back(std::make_unique<SimBench>(std::move(cells[i]), clock, o));
  }
  if (!benches_.empty()) enclosure_c_ = benches_.front()->cell_temperature_c();
  load_ = std::make_unique<Router>(*this, Router::Role::kLoad);
  meter_ = std::make_unique<Router>(*this, Router::Role::kMeter);
  thermometer_ = std::make_unique<Router>(*this, Router::Role::kThermometer);
  supply_ = std::make_unique<Router>(*this, Router::Role::kSupply);
}

SimMultiBench::~SimMultiBench() = default;

LineDevice& SimMultiBench::load() { return *load_; }
LineDevice& SimMultiBench::meter() { return *meter_; }
LineDevice& SimMultiBench::thermometer() { return *thermometer_; }
LineDevice& SimMultiBench::supply() { return *supply_; }

void SimMultiBench::SetEnclosure(double c) {
  std::lock_guard<std::mutex> lk(mu_);
  enclosure_c_ = c;
}

double SimMultiBench::enclosure_c() const {
  std::lock_guard<std::mutex> lk(mu_);
  return enclosure_c_;
}

long SimMultiBench::select_lines() const {
  return load_->selects() + meter_->selects() + thermometer_->selects() + supply_->selects();
}

}  // namespace kp::sim
