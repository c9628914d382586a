#include "drivers/sim/cell_model.h"

#include <algorithm>
#include <cmath>

#include "analysis/calendar.h"

namespace kp::sim {
namespace {

constexpr double kGasConstant = 8.314462618;  // J/(mol·K), CODATA
constexpr double kKelvin = 273.15;
constexpr double kMonthS = kp::kSecondsPerMonth;
// Below an empty available well the OCV collapses linearly to 0 V over this
// much of the capacity, so a load that keeps pulling sees the voltage vanish.
constexpr double kCollapseLevel = 0.02;

// x + expm1(-x) = x²/2 − x³/6 + …, without cancellation for small x.
double RampTerm(double x) {
  if (x < 1e-4) return x * x * (0.5 - x / 6.0 + x * x / 24.0);
  return x + std::expm1(-x);
}

}  // namespace

double Interpolate(const std::vector<std::pair<double, double>>& table, double x) {
  if (table.empty()) return 0.0;
  if (x <= table.front().first) return table.front().second;
  if (x >= table.back().first) return table.back().second;
  auto hi = std::lower_bound(table.begin(), table.end(), x, [](const auto& p, double v) { return p.first < v; });
  auto lo = hi - 1;
  double f = (x - lo->first) / (hi->first - lo->first);
  return lo->second + f * (hi->second - lo->second);
}

MonotoneCurve::MonotoneCurve(std::vector<std::pair<double, double>> table) : table_(std::move(table)) {
  const size_t n = table_.size();
  slope_.assign(n, 0.0);
  if (n < 2) return;
  auto secant = [&](size_t i) {  // slope of interval i
    return (table_[i + 1].second - table_[i].second) / (table_[i + 1].first - table_[i].first);
  };
  slope_[0] = secant(0);
  slope_[n - 1] = secant(n - 2);
  for (size_t i = 1; i + 1 < n; ++i) {
    const double h0 = table_[i].first - table_[i - 1].first, h1 = table_[i + 1].first - table_[i].first;
    const double s0 = secant(i - 1), s1 = secant(i);
    const double p = (s0 * h1 + s1 * h0) / (h0 + h1);  // slope of the parabola through the three points
    const double sign = (s0 > 0) - (s0 < 0) + (s1 > 0) - (s1 < 0);
    slope_[i] = sign * std::min({std::abs(s0), std::abs(s1), 0.5 * std::abs(p)});
  }
}

size_t MonotoneCurve::Interval(double x) const {
  auto hi = std::upper_bound(table_.begin(), table_.end(), x, [](double v, const auto& p) { return v < p.first; });
  size_t i = static_cast<size_t>(hi - table_.begin());
  return std::clamp<size_t>(i, 1, table_.size() - 1) - 1;
}

double MonotoneCurve::operator()(double x) const {
  if (table_.empty()) return 0.0;
  if (x <= table_.front().first) return table_.front().second;
  if (x >= table_.back().first) return table_.back().second;
  const size_t i = Interval(x);
  const double h = table_[i + 1].first - table_[i].first;
  const double s = (table_[i + 1].second - table_[i].second) / h;
  const double d0 = slope_[i], d1 = slope_[i + 1];
  const double a = (d0 + d1 - 2.0 * s) / (h * h), b = (3.0 * s - 2.0 * d0 - d1) / h;
  const double u = x - table_[i].first;
  return ((a * u + b) * u + d0) * u + table_[i].second;
}

double MonotoneCurve::Slope(double x) const {
  if (table_.size() < 2 || x < table_.front().first || x > table_.back().first) return 0.0;
  const size_t i = Interval(x);
  const double h = table_[i + 1].first - table_[i].first;
  const double s = (table_[i + 1].second - table_[i].second) / h;
  const double d0 = slope_[i], d1 = slope_[i + 1];
  const double a = (d0 + d1 - 2.0 * s) / (h * h), b = (3.0 * s - 2.0 * d0 - d1) / h;
  const double u = x - table_[i].first;
  return (3.0 * a * u + 2.0 * b) * u + d0;
}

void KibamStep(double c, double k_per_s, double current_a, double t_s, double& y1, double& y2) {
  if (c >= 1.0) {  // single well
    y1 -= current_a * t_s;
    return;
  }
  if (k_per_s <= 0.0) {  // no exchange: the bound charge stays put
    y1 -= current_a * t_s;
    return;
  }
  const double kp = k_per_s / (c * (1.0 - c));
  const double x = kp * t_s;
  const double e = std::exp(-x);
  const double one_minus_e = -std::expm1(-x);
  const double ramp = RampTerm(x);
  const double y0 = y1 + y2;
  const double i = current_a;
  double n1 = y1 * e + (y0 * kp * c - i) * one_minus_e / kp - i * c * ramp / kp;
  double n2 = y2 * e + y0 * (1.0 - c) * one_minus_e - i * (1.0 - c) * ramp / kp;
  y1 = n1;
  y2 = n2;
}

CellModel::CellModel(CellParams params) : params_(std::move(params)), ocv_(params_.ocv_table) {
  const double q = params_.capacity_ah * 3600.0;
  const double c = std::clamp(params_.kibam_c, 1e-6, 1.0);
  state_.available_c = c * q * params_.initial_soc;
  state_.bound_c = (1.0 - c) * q * params_.initial_soc;
  state_.temperature_c = params_.ambient_c;
  if (params_.start_state) state_ = *params_.start_state;
}

double CellModel::soc() const { return (state_.available_c + state_.bound_c) / (params_.capacity_ah * 3600.0); }

double CellModel::available_level() const {
  const double c = std::clamp(params_.kibam_c, 1e-6, 1.0);
  return state_.available_c / (c * params_.capacity_ah * 3600.0);
}

double CellModel::bound_level() const {
  const double c = params_.kibam_c;
  if (c >= 1.0) return available_level();
  return state_.bound_c / ((1.0 - c) * params_.capacity_ah * 3600.0);
}

double CellModel::ArrheniusFactor() const { return ArrheniusFactor(params_.activation_energy_j_per_mol); }

double CellModel::ArrheniusFactor(double activation_energy_j_per_mol) const {
  if (activation_energy_j_per_mol <= 0.0) return 1.0;
  const double t_k = std::max(state_.temperature_c + kKelvin, 150.0);
  const double ref_k = params_.reference_c + kKelvin;
  return std::exp(activation_energy_j_per_mol / kGasConstant * (1.0 / t_k - 1.0 / ref_k));
}

double CellModel::ResistanceFactor() const {
  double f = ArrheniusFactor();
  if (params_.resistance_rise_at_empty > 0.0 && params_.resistance_rise_width > 0.0) {
    const double h1 = std::clamp(available_level(), 0.0, 1.0);
    f *= 1.0 + params_.resistance_rise_at_empty * std::exp(-h1 / params_.resistance_rise_width);
  }
  return f;
}

double CellModel::R0() const { return params_.r0_ohm * ResistanceFactor(); }

double CellModel::TotalResistance() const { return (params_.r0_ohm + params_.r1_ohm + params_.r2_ohm) * ResistanceFactor(); }

double CellModel::OpenCircuitVoltage() const {
  const double h1 = available_level();
  const double shift =
      params_.ocv_temp_coeff_v_per_k * (state_.temperature_c - params_.reference_c) + state_.hysteresis_v;
  if (h1 >= 0.0) return std::max(0.0, ocv_(h1) + shift);
  const double empty_v = ocv_(0.0) + shift;
  return std::max(0.0, empty_v * (1.0 + h1 / kCollapseLevel));
}

Thevenin CellModel::Equivalent() const { return {OpenCircuitVoltage() - state_.v1_v - state_.v2_v, R0()}; }

void CellModel::Advance(double dt_s, double current_a, double extra_heat_w) {
  if (dt_s <= 0) return;
  const CellParams& p = params_;
  const double arr = ArrheniusFactor();
  const double rf = ResistanceFactor();
  const double r0 = p.r0_ohm * rf, r1 = p.r1_ohm * rf, r2 = p.r2_ohm * rf;

  // RC pairs: dv/dt = (I·R − v)/τ, exact for constant I.
  auto rc = [&](double v, double r, double tau) {
    if (r <= 0.0 || tau <= 0.0) return current_a * r;
    return current_a * r + (v - current_a * r) * std::exp(-dt_s / tau);
  };
  const double v1 = rc(state_.v1_v, r1, p.tau1_s);
  const double v2 = rc(state_.v2_v, r2, p.tau2_s);
  // Joule heat: I²R0 plus v²/R in each RC resistor (mean of the step's ends).
  double heat_w = current_a * current_a * r0 + extra_heat_w;
  if (r1 > 0) heat_w += 0.5 * (state_.v1_v * state_.v1_v + v1 * v1) / r1;
  if (r2 > 0) heat_w += 0.5 * (state_.v2_v * state_.v2_v + v2 * v2) / r2;
  state_.v1_v = v1;
  state_.v2_v = v2;

  // Wells. Charging stores only the efficient part; the rest becomes heat.
  double well_current_a = current_a;
  if (current_a < 0) {
    well_current_a = current_a * std::clamp(p.charge_efficiency, 0.0, 1.0);
    heat_w += (well_current_a - current_a) * OpenCircuitVoltage();
  }
  const double c = std::clamp(p.kibam_c, 1e-6, 1.0);
  const double k_arr =
      p.kibam_activation_energy_j_per_mol < 0.0 ? arr : ArrheniusFactor(p.kibam_activation_energy_j_per_mol);
  KibamStep(c, p.kibam_k_per_s / k_arr, well_current_a, dt_s, state_.available_c, state_.bound_c);
  const double q = p.capacity_ah * 3600.0;
  const double y1_max = c * q, y2_max = (1.0 - c) * q;
  if (state_.available_c > y1_max) {  // full: the excess charge turns into heat
    heat_w += (state_.available_c - y1_max) / dt_s * p.full_v;
    state_.available_c = y1_max;
  }
  state_.bound_c = std::min(state_.bound_c, y2_max);
  state_.available_c = std::max(state_.available_c, -kCollapseLevel * y1_max);
  state_.bound_c = std::max(state_.bound_c, 0.0);

  // Hysteresis: towards −M while discharging, +M while charging, exact for
  // constant current (the offset follows the charge moved, not time).
  if (p.ocv_hysteresis_v > 0.0 && current_a != 0.0 && p.ocv_hysteresis_span > 0.0) {
    const double target = current_a > 0 ? -p.ocv_hysteresis_v : p.ocv_hysteresis_v;
    const double moved = std::abs(current_a) * dt_s / (p.ocv_hysteresis_span * q);
    state_.hysteresis_v = target + (state_.hysteresis_v - target) * std::exp(-moved);
  }

  // Self-discharge: first-order leak of the stored charge.
  if (p.self_discharge_per_month > 0.0 && p.self_discharge_per_month < 1.0) {
    const double lambda = -std::log1p(-p.self_discharge_per_month) / kMonthS;
    const double f = std::exp(-lambda * dt_s);
    if (state_.available_c > 0) state_.available_c *= f;
    state_.bound_c *= f;
  }

  // First-order thermal model: C dT/dt = P − (T − Ta)/Rth, solved exactly over dt.
  const double t_inf = p.ambient_c + heat_w * p.thermal_resistance_k_per_w;
  const double tau = p.heat_capacity_j_per_k * p.thermal_resistance_k_per_w;
  state_.temperature_c = t_inf + (state_.temperature_c - t_inf) * std::exp(-dt_s / tau);
}

}  // namespace kp::sim
