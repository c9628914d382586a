// Simulated cell: the physics behind the simulated instruments.
//
// Equivalent circuit seen from the terminals: an EMF (open-circuit voltage as a
// function of state of charge) behind a series resistance R0; a lumped thermal
// mass warmed by I²·R0 and cooled through a thermal resistance to ambient.
// Sign convention: current_a > 0 discharges the cell.
#pragma once

#include <string>
#include <utility>
#include <vector>

namespace kp::sim {

struct CellParams {
  std::string name = "sim-cell";
  std::string chemistry = "li-ion";
  double capacity_ah = 2.5;  // charge actually stored when full
  // Open-circuit voltage table: (state of charge 0..1, volts), ascending SOC.
  std::vector<std::pair<double, double>> ocv_table;
  double r0_ohm = 0.045;
  double heat_capacity_j_per_k = 45.0;       // lumped thermal mass
  double thermal_resistance_k_per_w = 20.0;  // cell surface to ambient
  double ambient_c = 22.0;
  double initial_soc = 1.0;
};

// Invented demo cell (not a real product): a 2.5 Ah NMC-like 18650 whose OCV
// curve follows published Ni-rich pseudo-OCV breakpoints (see cell_model.cpp).
CellParams DemoLiIonCell(double capacity_ah = 2.56);

// Source seen by a load: terminal voltage = emf_v - current * r_ohm.
struct Thevenin {
  double emf_v = 0.0;
  double r_ohm = 0.0;
};

class CellModel {
 public:
  explicit CellModel(CellParams params);

  Thevenin Equivalent() const;
  // Integrates `dt_s` seconds at constant `current_a`; `extra_heat_w` adds heat
  // from outside the electrical model (used by the thermal-runaway fault).
  void Advance(double dt_s, double current_a, double extra_heat_w = 0.0);

  double soc() const { return soc_; }
  double temperature_c() const { return temperature_c_; }
  double OpenCircuitVoltage() const;
  const CellParams& params() const { return params_; }

 private:
  CellParams params_;
  double soc_;
  double temperature_c_;
};

// Linear interpolation in an ascending (x, y) table, clamped at the ends.
double Interpolate(const std::vector<std::pair<double, double>>& table, double x);

}  // namespace kp::sim
