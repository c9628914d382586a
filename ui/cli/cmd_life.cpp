// `life`: product-life projection, a pure calculation (no run needed).
#include <fmt/format.h>

#include <cmath>
#include <fstream>
#include <iostream>
#include <nlohmann/json.hpp>
#include <sstream>

#include "analysis/life.h"
#include "drivers/spelling.h"
#include "procedures/procedure_parser.h"
#include "procedures/units.h"
#include "ui/cli/cli.h"

namespace kp::cli {
namespace {

struct LifeOptions {
  std::string capacity, average, self_discharge, profile_path, quiescent, efficiency, measured_at;
  double peukert_k = 0.0;
  bool json = false;
};

Result<double> Quantity(const std::string& option, const std::string& text, Dimension dim) {
  ParsedQuantity q = ParseQuantityText(text, dim, option);
  if (!q.value) return InvalidInput(fmt::format("{} '{}': {} (column {})", option, text, q.error, q.error_column));
  return *q.value;
}

// The lines of the older `life` profile syntax ("8uA for 10s [compressed]").
bool LooksLikeOldDutySyntax(const std::string& text) {
  std::istringstream in(text);
  std::string line;
  while (std::getline(in, line)) {
    std::istringstream words(line.substr(0, line.find('#')));
    std::string a, b;
    if ((words >> a >> b) && (b == "for" || a == "compress")) return true;
  }
  return false;
}

// `FILE` or `FILE:NAME`: the duty block NAME of a procedure file, or the only
// duty block of a file. Phases must be currents; durations are the real ones.
Result<DutyProfile> ReadDuty(const std::string& ref) {
  std::string path = ref, name;
  std::ifstream whole(ref, std::ios::binary);
  if (!whole) {
    size_t colon = ref.rfind(':');
    if (colon != std::string::npos && colon > 0) path = ref.substr(0, colon), name = ref.substr(colon + 1);
  }
  std::ifstream f(path, std::ios::binary);
  if (!f) return NotFound(fmt::format("cannot read duty file '{}'", path));
  std::stringstream ss;
  ss << f.rdbuf();
  auto patterns = ReadDutyPatterns(ss.str(), path);
  if (!patterns.ok()) {
    if (LooksLikeOldDutySyntax(ss.str()))
      return InvalidInput(fmt::format(
          "{}: this is the older duty syntax ('8uA for 10s compressed'), which is no longer read: write the profile as a "
          "procedure's block (procedures/LANGUAGE.md), as in\n  duty sensor-node\n    phase sleep 8uA/599.5s\n    phase "
          "report 25mA/0.5s\n  end",
          path));
    return patterns.status();
  }
  const DutyPattern* pick = nullptr;
  std::string names;
  for (const DutyPattern& p : *patterns) {
    names += (names.empty() ? "" : ", ") + p.name;
    if (p.name == name) pick = &p;
  }
  if (name.empty()) {
    if (patterns->size() != 1)
      return InvalidInput(fmt::format("{} holds {} duty blocks ({}): name one, as in --duty {}:{}", path, patterns->size(),
                                      names, path, patterns->front().name));
    pick = &patterns->front();
  } else if (pick == nullptr) {
    std::vector<std::string> known;
    for (const DutyPattern& p : *patterns) known.push_back(p.name);
    return NotFound(fmt::format("{} has no duty block named '{}'{} (it has: {})", path, name, DidYouMean(name, known), names));
  }
  DutyProfile profile;
  for (const Segment& g : pick->phases) {
    if (g.mode != LoadMode::kCurrent)
      return InvalidInput(fmt::format("{}: duty '{}', phase '{}': life needs every phase as a current, not a {}", path,
                                      pick->name, g.name, g.mode == LoadMode::kPower ? "power" : "resistance"));
    profile.levels.push_back(ProfileLevel{g.level, g.real_duration_s, false});
  }
  return profile;
}

// "40 uA", "25 mA", "1.2 A".
std::string FormatCurrent(double a) {
  if (a >= 1.0) return fmt::format("{:.4g} A", a);
  if (a >= 1e-3) return fmt::format("{:.4g} mA", a * 1e3);
  return fmt::format("{:.4g} uA", a * 1e6);
}

bool opt_peukert(const LifeOptions& o) { return o.peukert_k > 0; }

int RunLife(const LifeOptions& o) {
  LifeInputs in;
  if (o.capacity.empty()) return Fail(InvalidInput("--capacity is required (e.g. --capacity 2000mAh)"));
  auto cap = Quantity("--capacity", o.capacity, Dimension::kCharge);
  if (!cap.ok()) return Fail(cap.status());
  in.capacity_mah = *cap;
  std::optional<DutyProfile> profile;
  if (!o.profile_path.empty()) {
    auto p = ReadDuty(o.profile_path);
    if (!p.ok()) return Fail(p.status());
    profile = *p;
  }
  if (!o.average.empty() && profile) return Fail(InvalidInput("give either --average or --duty, not both"));
  if (profile) {
    in.average_current_a = ProfileAverageCurrentA(*profile);
  } else if (!o.average.empty()) {
    auto a = Quantity("--average", o.average, Dimension::kCurrent);
    if (!a.ok()) return Fail(a.status());
    in.average_current_a = *a;
  } else {
    return Fail(InvalidInput("give the load's --average current or a duty block with --duty FILE[:NAME]"));
  }
  if (!o.self_discharge.empty()) {
    auto v = Quantity("--self-discharge", o.self_discharge, Dimension::kRatePerMonth);
    if (!v.ok()) return Fail(v.status());
    in.self_discharge_per_month = *v;
  }
  if (!o.quiescent.empty()) {
    auto v = Quantity("--quiescent", o.quiescent, Dimension::kCurrent);
    if (!v.ok()) return Fail(v.status());
    in.quiescent_a = *v;
  }
  if (!o.efficiency.empty()) {
    auto v = Quantity("--efficiency", o.efficiency, Dimension::kFraction);
    if (!v.ok()) return Fail(v.status());
    in.efficiency = *v;
  }
  if (opt_peukert(o)) {
    // The capacity was measured at --measured-at; Peukert (1897) C_p = I^k t
    // gives C_p = Q_ref · I_ref^(k-1) with Q in Ah.
    if (o.measured_at.empty())
      return Fail(InvalidInput("--peukert needs --measured-at (the current the capacity was measured at)"));
    auto ref = Quantity("--measured-at", o.measured_at, Dimension::kCurrent);
    if (!ref.ok()) return Fail(ref.status());
    if (!(*ref > 0)) return Fail(InvalidInput("--measured-at must be > 0"));
    PeukertFit f;
    f.exponent_k = o.peukert_k;
    f.capacity_constant = in.capacity_mah / 1000.0 * std::pow(*ref, o.peukert_k - 1.0);
    in.peukert = f;
  }
  LifeOutcome r = ProjectLife(in);
  if (!r.projection) return Fail(InvalidInput(r.error));
  const LifeProjection& p = *r.projection;
  if (o.json) {
    nlohmann::json j{{"capacity_mAh", p.capacity_mah},
                     {"average_current_A", p.average_current_a},
                     {"battery_current_A", p.battery_current_a},
                     {"self_discharge_A", p.self_discharge_a},
                     {"hours", p.hours},
                     {"years", p.years},
                     {"allowances", p.allowances},
                     {"assumptions", p.assumptions}};
    if (profile) {
      j["profile"] = {{"file", o.profile_path},
                      {"cycle_s", ProfileCycleS(*profile)},
                      {"peak_current_A", ProfilePeakCurrentA(*profile)},
                      {"compression_factor", profile->compression_factor},
                      {"test_average_current_A", ProfileTestAverageCurrentA(*profile)}};
    }
    std::cout << j.dump(2, ' ', false, nlohmann::json::error_handler_t::replace) << "\n";
    return kExitOk;
  }
  std::cout << fmt::format("capacity         {:.1f} mAh\n", p.capacity_mah);
  std::cout << fmt::format("average current  {}{}\n", FormatCurrent(p.average_current_a),
                           profile ? fmt::format(" (duty {}, cycle {:.4g} s)", o.profile_path, ProfileCycleS(*profile)) : "");
  if (p.battery_current_a != p.average_current_a)
    std::cout << fmt::format("battery current  {}\n", FormatCurrent(p.battery_current_a));
  std::cout << fmt::format("life             {:.0f} h = {:.1f} days = {:.3g} years\n", p.hours, p.hours / 24.0, p.years);
  std::cout << "assumptions:\n";
  for (const std::string& a : p.assumptions) std::cout << "  - " << a << "\n";
  return kExitOk;
}

}  // namespace

void RegisterLife(CliRegistry& r) {
  static LifeOptions opt;
  opt = LifeOptions{};  // fresh defaults on every registration (RunCli may run more than once)
  CLI::App* cmd =
      r.Add("life", "Project product life from capacity and a duty cycle (pure calculation)", [] { return RunLife(opt); });
  cmd->add_option("--capacity", opt.capacity, "Usable capacity, e.g. 2000mAh or 2.4Ah");
  cmd->add_option("--average", opt.average, "Average load current, e.g. 40uA");
  cmd->add_option("--duty,--profile", opt.profile_path,
                  "Duty profile: FILE:NAME, the `duty NAME` block of a procedure file, or FILE holding one duty block "
                  "(procedures/LANGUAGE.md); its real phase durations are used");
  cmd->add_option("--self-discharge", opt.self_discharge, "Self-discharge allowance, e.g. 2%/month or 10%/year");
  cmd->add_option("--quiescent", opt.quiescent, "Regulator quiescent current, e.g. 1uA");
  cmd->add_option("--efficiency", opt.efficiency, "Regulator efficiency, e.g. 85%");
  cmd->add_option("--peukert", opt.peukert_k, "Derate the capacity to the average current with this Peukert exponent k")
      ->check(CLI::Range(1.0, 2.0));
  cmd->add_option("--measured-at", opt.measured_at, "Current at which --capacity was measured (with --peukert), e.g. 500mA");
  cmd->add_flag("--json", opt.json, "Machine-readable output");
}

}  // namespace kp::cli
