// Simulated cell: the physics behind the simulated instruments.
//
// Equivalent circuit seen from the terminals: an open-circuit voltage (OCV, a
// table over the available-charge level joined by a monotone cubic (Steffen's
// method), shifted mildly with temperature)
// behind a series resistance R0 and two RC pairs (a fast and a slow one).
// Resistances follow an Arrhenius law in the cell temperature.
//
// Charge is held in the two wells of the Kinetic Battery Model (Manwell &
// McGowan, Solar Energy 50(5), 1993): the load drains the available well
// (fraction c of the capacity) while charge flows in from the bound well at a
// rate k times the difference of their levels. The OCV follows the available
// level, so a heavy current reaches the cutoff with charge left in the bound
// well (rate-capacity effect) and a rest lets the voltage recover.
//
// A lumped thermal mass is warmed by the Joule heat of R0 and the RC resistors
// and cooled through a thermal resistance to ambient. Stored charge leaks at a
// per-chemistry self-discharge rate. A negative current charges the cell (times
// the charge efficiency; 0 for primary cells); the available well stops
// accepting charge at full and the excess turns into heat.
//
// Sign convention: current_a > 0 discharges the cell. Not thread-safe; the
// owner (SimBench) serialises access.
#pragma once

#include <optional>
#include <string>
#include <utility>
#include <vector>

namespace kp::sim {

// Linear interpolation in an ascending (x, y) table, clamped at the ends.
double Interpolate(const std::vector<std::pair<double, double>>& table, double x);

// Shape-preserving cubic through an ascending (x, y) table: Steffen's method
// (M. Steffen, "A simple method for monotonic interpolation in one dimension",
// Astronomy & Astrophysics 239, 1990; the method GSL implements as
// gsl_interp_steffen (from memory)). The curve passes through every point, is
// monotone wherever the data are, never overshoots between points, and its
// first derivative is continuous. End slopes: the slope of the end interval
// (the paper's simplest boundary choice, as GSL does). Outside the table the
// value is clamped to the end points.
class MonotoneCurve {
 public:
  MonotoneCurve() = default;
  explicit MonotoneCurve(std::vector<std::pair<double, double>> table);
  double operator()(double x) const;
  double Slope(double x) const;  // dy/dx (0 outside the table)
  bool empty() const { return table_.empty(); }

 private:
  size_t Interval(double x) const;
  std::vector<std::pair<double, double>> table_;
  std::vector<double> slope_;  // dy/dx at each point
};

// Everything that evolves; enough to continue a simulation elsewhere.
struct CellState {
  double available_c = 0.0;  // KiBaM y1, coulombs
  double bound_c = 0.0;      // KiBaM y2, coulombs
  double v1_v = 0.0;         // voltage across the fast RC pair (discharge positive)
  double v2_v = 0.0;         // voltage across the slow RC pair
  double temperature_c = 25.0;
  double hysteresis_v = 0.0;  // OCV offset of the hysteresis: −M after discharging, +M after charging
};

struct CellParams {
  std::string name = "sim-cell";
  std::string chemistry = "li-ion";
  bool rechargeable = true;
  // Ratings, as a datasheet prints them (checks, supply defaults, displays).
  double nominal_v = 3.6;
  double full_v = 4.2;
  double cutoff_v = 2.75;
  double rated_ah = 2.5;  // datasheet capacity (C-rates refer to it)

  double capacity_ah = 2.5;  // charge stored when full, both wells together
  // Open-circuit voltage table: (available-well level 0..1, volts), ascending.
  std::vector<std::pair<double, double>> ocv_table;
  double ocv_temp_coeff_v_per_k = 0.0;  // dOCV/dT around reference_c
  // OCV hysteresis (off when 0): the rest voltage sits up to M above the curve
  // after charging and M below it after discharging. Moving charge q drives the
  // offset towards the new side as 1 − exp(−|q| / (span · capacity)): a
  // one-state hysteresis as in enhanced self-correcting cell models (Plett,
  // J. Power Sources 134, 2004; from memory). Rests keep it.
  double ocv_hysteresis_v = 0.0;
  double ocv_hysteresis_span = 0.05;
  double reference_c = 25.0;            // temperature at which the values below hold

  double r0_ohm = 0.045;  // series (ohmic) resistance
  double r1_ohm = 0.0;    // fast RC pair (charge transfer)
  double tau1_s = 10.0;
  double r2_ohm = 0.0;  // slow RC pair (diffusion)
  double tau2_s = 300.0;
  // Arrhenius activation energy: R(T) = R_ref·exp(Ea/Rg·(1/T − 1/T_ref)); the
  // well exchange rate k scales with the inverse factor. 0: no dependence.
  double activation_energy_j_per_mol = 0.0;
  // Resistances also rise towards empty: factor 1 + rise·exp(−level/width),
  // level being the available-well level (0: no rise).
  double resistance_rise_at_empty = 0.0;
  double resistance_rise_width = 0.05;

  // Kinetic Battery Model: c = available fraction (1: a single well, no rate or
  // recovery effect), k = exchange rate between the wells.
  double kibam_c = 1.0;
  double kibam_k_per_s = 0.0;
  // Arrhenius activation energy of the exchange rate k (diffusion inside the
  // electrodes, which slows more in the cold than the ohmic paths); k(T) =
  // k_ref·exp(−Ea/Rg·(1/T − 1/T_ref)). < 0: the resistances' activation energy.
  double kibam_activation_energy_j_per_mol = -1.0;

  double self_discharge_per_month = 0.0;  // fraction of stored charge lost per month (kDaysPerMonth, analysis/calendar.h)
  double charge_efficiency = 1.0;         // fraction of charging current stored; 0: primary

  double heat_capacity_j_per_k = 45.0;       // lumped thermal mass
  double thermal_resistance_k_per_w = 20.0;  // cell surface to ambient
  double ambient_c = 22.0;
  double initial_soc = 1.0;  // both wells at this level, RC pairs relaxed, T = ambient
  // When set, the cell starts in this state instead (initial_soc unused): a
  // cell continued from an earlier simulation (resume of a logged run).
  std::optional<CellState> start_state;
};

// Invented demo cell (not a real product): a 2.5 Ah-class NMC-like 18650,
// the built-in "li-ion" preset (see cell_file.h) with the given capacity.
CellParams DemoLiIonCell(double capacity_ah = 2.56);

// Source seen by a load: terminal voltage = emf_v - current * r_ohm.
struct Thevenin {
  double emf_v = 0.0;
  double r_ohm = 0.0;
};

class CellModel {
 public:
  explicit CellModel(CellParams params);

  // EMF = OCV − RC voltages, r = R0 at the present temperature.
  Thevenin Equivalent() const;
  // Integrates `dt_s` seconds at constant `current_a`; `extra_heat_w` adds heat
  // from outside the electrical model (used by the thermal-runaway fault).
  // Exact for constant current and heat apart from the slow coupling through
  // temperature (resistances are taken at the step's start temperature), so
  // steps of seconds keep the RC and well dynamics accurate.
  void Advance(double dt_s, double current_a, double extra_heat_w = 0.0);

  double soc() const;              // stored charge / capacity, both wells
  double available_level() const;  // h1 / capacity: what the OCV follows
  double bound_level() const;      // h2 / capacity
  double temperature_c() const { return state_.temperature_c; }
  double OpenCircuitVoltage() const;  // at the available level and temperature
  // Resistances at the present temperature.
  double R0() const;
  double TotalResistance() const;  // R0 + R1 + R2 (DC, RC pairs settled)
  const CellParams& params() const { return params_; }
  const CellState& state() const { return state_; }
  void set_state(const CellState& s) { state_ = s; }
  void set_ambient_c(double ambient_c) { params_.ambient_c = ambient_c; }

 private:
  double ArrheniusFactor() const;  // resistances: R(T) / R(T_ref)
  double ArrheniusFactor(double activation_energy_j_per_mol) const;
  double ResistanceFactor() const;  // Arrhenius × rise towards empty

  CellParams params_;
  MonotoneCurve ocv_;
  CellState state_;
};

// Kinetic Battery Model closed form for constant current over `t_s` (Manwell &
// McGowan 1993, as restated by Jongerden & Haverkort): updates y1 (available)
// and y2 (bound) in coulombs. c in (0, 1), k >= 0 per second, current in A.
void KibamStep(double c, double k_per_s, double current_a, double t_s, double& y1, double& y2);

}  // namespace kp::sim
