#include "drivers/sim/cell_model.h"

#include <algorithm>
#include <cmath>

namespace kp::sim {

double Interpolate(const std::vector<std::pair<double, double>>& table, double x) {
  if (table.empty()) return 0.0;
  if (x <= table.front().first) return table.front().second;
  if (x >= table.back().first) return table.back().second;
  auto hi = std::lower_bound(table.begin(), table.end(), x, [](const auto& p, double v) { return p.first < v; });
  auto lo = hi - 1;
  double f = (x - lo->first) / (hi->first - lo->first);
  return lo->second + f * (hi->second - lo->second);
}

CellParams DemoLiIonCell(double capacity_ah) {
  CellParams p;
  p.name = "sim NMC 18650";
  p.chemistry = "li-ion";
  p.capacity_ah = capacity_ah;
  // Pseudo-OCV breakpoints of a Ni-rich 21700 cell, Sunil, Pattipati &
  // Balasingam, IEEE Trans. Instrum. Meas. 2025 (secondary: authors' README).
  p.ocv_table = {{0.0, 2.5000},    {0.0050, 2.8080}, {0.0352, 3.1179}, {0.0854, 3.3182},
                 {0.1357, 3.4193}, {0.2915, 3.5826}, {0.4523, 3.6941}, {0.8392, 4.0664},
                 {0.9548, 4.1121}, {1.0, 4.2000}};
  p.r0_ohm = 0.045;  // 18650-class R0 is about 20-80 mOhm (from memory)
  return p;
}

CellModel::CellModel(CellParams params)
    : params_(std::move(params)), soc_(params_.initial_soc), temperature_c_(params_.ambient_c) {}

double CellModel::OpenCircuitVoltage() const { return Interpolate(params_.ocv_table, soc_); }

Thevenin CellModel::Equivalent() const { return {OpenCircuitVoltage(), params_.r0_ohm}; }

void CellModel::Advance(double dt_s, double current_a, double extra_heat_w) {
  if (dt_s <= 0) return;
  soc_ -= current_a * dt_s / 3600.0 / params_.capacity_ah;
  soc_ = std::clamp(soc_, 0.0, 1.0);
  // First-order thermal model: C dT/dt = P - (T - Ta)/Rth, solved exactly over dt.
  double p = current_a * current_a * params_.r0_ohm + extra_heat_w;
  double t_inf = params_.ambient_c + p * params_.thermal_resistance_k_per_w;
  double tau = params_.heat_capacity_j_per_k * params_.thermal_resistance_k_per_w;
  temperature_c_ = t_inf + (temperature_c_ - t_inf) * std::exp(-dt_s / tau);
}

}  // namespace kp::sim
