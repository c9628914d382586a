#include "analysis/verdict.h"

#include <fmt/format.h>

#include <algorithm>
#include <cctype>
#include <cmath>

namespace kp {
namespace {


bool IsPrimaryChemistry(const std::string& c) {
  // Non-rechargeable chemistries by their usual short names (from memory).
  static const char* const kPrimary[] = {"alkaline", "zinc-carbon", "li-mno2", "li-socl2", "li-fes2", "li-cfx",
                                         "silver-oxide", "zinc-air", "lithium-primary"};
  for (const char* p : kPrimary)
    if (c == p) return true;
  return false;
}

}  // namespace

CapacityMethod MethodForChemistry(std::string_view chemistry) {
  std::string c;
  for (char ch : chemistry) c += static_cast<char>(std::tolower(static_cast<unsigned char>(ch)));
  CapacityMethod m;
  if (c == "nimh" || c == "ni-mh") {
    m.name = "IEC 61951-2 rated capacity (0.2 It to 1.0 V)";
    m.end_voltage_v = 1.0;
  } else if (IsPrimaryChemistry(c)) {
    m.name = "delivered >= rated at the procedure's constant current (primary cell; IEC 60086 rates primaries by "
             "application discharge tests)";
    m.any_rate = true;
    m.rest_required = false;
  } else if (c.rfind("li", 0) == 0 || c.find("lithium") != std::string::npos) {  // li-ion, lifepo4...; not "alkaline"
    m.name = "IEC 61960-3 7.3.1 rated capacity (0.2 It to end voltage)";
  } else {
    m.name = "delivered >= rated at 0.2 It";
  }
  return m;
}

CapacityJudgement JudgeCapacityByMethod(const CapacityMethod& m, const DischargeConditions& r) {
  CapacityJudgement j;
  j.method = m.name;
  j.percent_of_rated = r.rated_mah > 0 ? 100.0 * r.delivered_mah / r.rated_mah : 0.0;
  j.capacity_pass = r.rated_mah > 0 && j.percent_of_rated >= m.required_percent;

  double it_a = r.rated_mah / 1000.0;  // It = Cn / 1 h
  double want_a = m.any_rate ? r.mean_current_a : m.rate_it * it_a;
  double tol_a = m.current_tolerance * want_a;
  bool mean_ok = want_a > 0 && std::abs(r.mean_current_a - want_a) <= tol_a;
  j.conditions.push_back({"discharge current",
                          m.any_rate ? fmt::format("constant ± {:.0f} %", m.current_tolerance * 100.0)
                                     : fmt::format("{:.3f} A ({} It) ± {:.0f} %", want_a, m.rate_it, m.current_tolerance * 100.0),
                          fmt::format("mean {:.4f} A, largest deviation {:.4f} A", r.mean_current_a, r.max_current_deviation_a),
                          mean_ok && r.max_current_deviation_a <= tol_a});
  // The reading counts when the band and the reading's tolerance overlap: the
  // cell may have been inside the band. Printed to 0.01 degC so a reading of
  // 25.04 degC is not shown as 25.0 beside a NO.
  const double tol_c = std::max(0.0, r.temperature_tolerance_c);
  j.conditions.push_back({"temperature",
                          fmt::format("{:.0f} to {:.0f} °C at the start (thermometer ± {:.2f} °C)", m.temp_min_c,
                                      m.temp_max_c, tol_c),
                          fmt::format("{:.2f} °C at the start, {:.2f} to {:.2f} °C during the discharge",
                                      r.start_temperature_c, r.min_temperature_c, r.max_temperature_c),
                          r.start_temperature_c >= m.temp_min_c - tol_c && r.start_temperature_c <= m.temp_max_c + tol_c});
  if (m.rest_required)
    j.conditions.push_back(
        {"rest before discharge", fmt::format("{:.0f} to {:.0f} h", m.rest_min_s / 3600.0, m.rest_max_s / 3600.0),
         r.rest_before_s ? fmt::format("{:.2f} h", *r.rest_before_s / 3600.0) : std::string("no rest step recorded"),
         r.rest_before_s && *r.rest_before_s >= m.rest_min_s && *r.rest_before_s <= m.rest_max_s});
  if (m.end_voltage_v) {
    // End voltage reached within 2 % (the discharge ran to it, not stopped early).
    j.conditions.push_back({"end voltage", fmt::format("{:.2f} V", *m.end_voltage_v), fmt::format("{:.3f} V", r.end_voltage_v),
                            r.end_voltage_v <= *m.end_voltage_v * 1.02});
  }
  j.conditions_met = std::all_of(j.conditions.begin(), j.conditions.end(), [](const ConditionCheck& c) { return c.met; });

  std::string unmet;
  for (const ConditionCheck& c : j.conditions)
    if (!c.met) unmet += (unmet.empty() ? "" : ", ") + c.name;
  const double judged_a = r.commanded_current_a.value_or(r.mean_current_a);
  double rate_it = it_a > 0 ? judged_a / it_a : 0.0;
  if (r.rated_mah <= 0) {
    j.not_judged_why = "no rated capacity";
  } else if (r.pulsed) {
    j.not_judged_why = "pulsed discharge";
  } else if (!r.not_constant_current.empty()) {
    j.not_judged_why = r.not_constant_current;
  } else if (r.mean_current_a <= 0.0 || judged_a <= 0.0) {
    j.not_judged_why = "no discharge recorded";
  } else if (!m.any_rate && std::abs(judged_a - want_a) > kJudgedRateWindow * want_a) {
    j.not_judged_why = fmt::format("constant current at {:.2f} It", rate_it);
  }
  j.judged = j.not_judged_why.empty();
  if (r.rated_mah <= 0) {
    j.text = fmt::format("no verdict: no rated capacity given ({})", m.name);
    j.brief = "-";
  } else if (!j.judged) {
    j.text = fmt::format("not judged: {}, not the constant-current test of {}; {:.0f} mAh is {:.1f} % of rated {:.0f} mAh",
                         j.not_judged_why, m.name, r.delivered_mah, j.percent_of_rated, r.rated_mah);
    j.brief = "not judged: " + j.not_judged_why;
  } else {
    j.text = fmt::format("{}: {:.0f} mAh is {:.1f} % of rated {:.0f} mAh (criterion >= {:.0f} %, {}); {}",
                         j.capacity_pass ? "PASS" : "FAIL", r.delivered_mah, j.percent_of_rated, r.rated_mah, m.required_percent,
                         m.name, j.conditions_met ? "all test conditions met" : "conditions not met: " + unmet);
    // Rounded down to 0.1 % so a FAIL never reads as 100.0 % (the epsilon
    // keeps 102 % computed as 101.99999... at 102.0).
    j.brief = fmt::format("{} {:.1f} %", j.capacity_pass ? "PASS" : "FAIL", std::floor(j.percent_of_rated * 10.0 + 1e-6) / 10.0);
  }
  return j;
}

}  // namespace kp
