// `life`: product-life projection, a pure calculation (no run needed).
#include <fmt/format.h>

#include <cmath>
#include <fstream>
#include <iostream>
#include <nlohmann/json.hpp>
#include <sstream>

#include "analysis/life.h"
#include "analysis/quantity.h"
#include "rig/cli/cli.h"

namespace kp::cli {
namespace {

struct LifeOptions {
  std::string capacity, average, self_discharge, profile_path, quiescent, efficiency, measured_at;
  double peukert_k = 0.0;
  bool json = false;
};

Result<double> Quantity(const std::string& option, const std::string& text, QuantityKind kind) {
  ParsedQuantity q = ParseQuantity(text, kind);
  if (!q.value) return InvalidInput(fmt::format("{} '{}': {} (column {})", option, text, q.error, q.error_column));
  return *q.value;
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
  auto cap = Quantity("--capacity", o.capacity, QuantityKind::kCharge);
  if (!cap.ok()) return Fail(cap.status());
  in.capacity_mah = *cap;
  std::optional<DutyProfile> profile;
  if (!o.profile_path.empty()) {
    std::ifstream f(o.profile_path, std::ios::binary);
    if (!f) return Fail(NotFound(fmt::format("cannot read profile '{}'", o.profile_path)));
    std::stringstream ss;
    ss << f.rdbuf();
    ProfileParse p = ParseDutyProfile(ss.str());
    if (!p.profile) return Fail(InvalidInput(fmt::format("{}:{}", o.profile_path, p.error)));
    profile = *p.profile;
  }
  if (!o.average.empty() && profile) return Fail(InvalidInput("give either --average or --profile, not both"));
  if (profile) {
    in.average_current_a = ProfileAverageCurrentA(*profile);
  } else if (!o.average.empty()) {
    auto a = Quantity("--average", o.average, QuantityKind::kCurrent);
    if (!a.ok()) return Fail(a.status());
    in.average_current_a = *a;
  } else {
    return Fail(InvalidInput("give the load's --average current or a duty-cycle --profile FILE"));
  }
  if (!o.self_discharge.empty()) {
    auto v = Quantity("--self-discharge", o.self_discharge, QuantityKind::kRatePerMonth);
    if (!v.ok()) return Fail(v.status());
    in.self_discharge_per_month = *v;
  }
  if (!o.quiescent.empty()) {
    auto v = Quantity("--quiescent", o.quiescent, QuantityKind::kCurrent);
    if (!v.ok()) return Fail(v.status());
    in.quiescent_a = *v;
  }
  if (!o.efficiency.empty()) {
    auto v = Quantity("--efficiency", o.efficiency, QuantityKind::kFraction);
    if (!v.ok()) return Fail(v.status());
    in.efficiency = *v;
  }
  if (opt_peukert(o)) {
    // The capacity was measured at --measured-at; Peukert (1897) C_p = I^k t
    // gives C_p = Q_ref · I_ref^(k-1) with Q in Ah.
    if (o.measured_at.empty())
      return Fail(InvalidInput("--peukert needs --measured-at (the current the capacity was measured at)"));
    auto ref = Quantity("--measured-at", o.measured_at, QuantityKind::kCurrent);
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
                           profile ? fmt::format(" (profile {}, cycle {:.4g} s)", o.profile_path, ProfileCycleS(*profile)) : "");
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
  cmd->add_option("--profile", opt.profile_path,
                  "Duty-cycle file: lines '<current> for <duration> [compressed]' and optional 'compress <factor>'");
  cmd->add_option("--self-discharge", opt.self_discharge, "Self-discharge allowance, e.g. 2%/month or 10%/year");
  cmd->add_option("--quiescent", opt.quiescent, "Regulator quiescent current, e.g. 1uA");
  cmd->add_option("--efficiency", opt.efficiency, "Regulator efficiency, e.g. 85%");
  cmd->add_option("--peukert", opt.peukert_k, "Derate the capacity to the average current with this Peukert exponent k")
      ->check(CLI::Range(1.0, 2.0));
  cmd->add_option("--measured-at", opt.measured_at, "Current at which --capacity was measured (with --peukert), e.g. 500mA");
  cmd->add_flag("--json", opt.json, "Machine-readable output");
}

}  // namespace kp::cli
