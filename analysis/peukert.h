// Peukert's law fitted over runs at different constant currents.
//
// Peukert (Elektrotechnische Zeitschrift, 1897): C_p = I^k · t, with t the
// time to end voltage at constant current I. Taking logarithms,
// ln t = ln C_p − k ln I, a straight line fitted by ordinary least squares;
// R² is reported on the log-log data. Pure functions, no I/O.
#pragma once

#include <optional>
#include <span>
#include <string>

namespace kp {

struct RatePoint {
  double current_a = 0.0;  // constant discharge current
  double hours = 0.0;      // time to end voltage
};

struct PeukertFit {
  double exponent_k = 0.0;
  double capacity_constant = 0.0;  // C_p in A^k·h
  double r_squared = 0.0;          // of the log-log fit (1 for two points)
  size_t points = 0;
  // Predicted run time and capacity at a constant current.
  double HoursAt(double current_a) const;
  double CapacityMahAt(double current_a) const { return current_a * HoursAt(current_a) * 1000.0; }
};

struct PeukertOutcome {
  std::optional<PeukertFit> fit;
  std::string error;  // why no fit (fewer than two distinct currents, non-positive values)
};

PeukertOutcome FitPeukert(std::span<const RatePoint> points);

}  // namespace kp
