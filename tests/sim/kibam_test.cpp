// Kinetic Battery Model: the closed form used by the simulator against an
// independent numerical integration (GSL's ODE solver, gsl_odeiv2, with the
// embedded Runge-Kutta Prince-Dormand (8, 9) stepper).
#include <gtest/gtest.h>

#include <gsl/gsl_errno.h>
#include <gsl/gsl_odeiv2.h>

#include <array>
#include <cmath>

#include "drivers/sim/cell_model.h"

namespace kp::sim {
namespace {

using State = std::array<double, 2>;

// The KiBaM equations as written by Manwell & McGowan, Solar Energy 50(5),
// 1993 (text, as restated by Jongerden & Haverkort in their survey of battery
// models for embedded systems; secondary):
// dy1/dt = −I + k(h2 − h1), dy2/dt = −k(h2 − h1), h1 = y1/c, h2 = y2/(1 − c).
struct Wells {
  double c, k, current_a;
};

int Rhs(double, const double x[], double dxdt[], void* params) {
  const Wells& w = *static_cast<const Wells*>(params);
  double h1 = x[0] / w.c, h2 = x[1] / (1.0 - w.c);
  dxdt[0] = -w.current_a + w.k * (h2 - h1);
  dxdt[1] = -w.k * (h2 - h1);
  return GSL_SUCCESS;
}

State Integrate(double c, double k, double current_a, double t_s, State y) {
  Wells w{c, k, current_a};
  gsl_odeiv2_system sys{Rhs, nullptr, 2, &w};
  gsl_odeiv2_driver* d = gsl_odeiv2_driver_alloc_y_new(&sys, gsl_odeiv2_step_rk8pd, t_s / 1000.0, 1e-13, 1e-13);
  double t = 0.0;
  int status = gsl_odeiv2_driver_apply(d, &t, t_s, y.data());
  gsl_odeiv2_driver_free(d);
  EXPECT_EQ(status, GSL_SUCCESS);
  return y;
}

struct Case {
  double c, k_per_s, current_a, t_s, y1, y2;
};

TEST(Kibam, ClosedFormMatchesGslIntegration) {
  const Case cases[] = {
      // Example parameters c = 0.625, k = 4.5e-5 /min (the example values of
      // the KiBaM literature, secondary source), 100 Ah at 5 A for 10 h from full.
      {0.625, 4.5e-5 / 60.0, 5.0, 36000.0, 0.625 * 360000.0, 0.375 * 360000.0},
      // The demo Li-ion preset's wells (c = 0.7, k = 1.3 /h), 2.5 A for 30 min.
      {0.7, 1.3 / 3600.0, 2.5, 1800.0, 0.7 * 9216.0, 0.3 * 9216.0},
      // Rest after a heavy pulse: the wells start unbalanced and equalise.
      {0.4, 0.3 / 3600.0, 0.0, 7200.0, 0.2 * 9720.0, 0.6 * 9720.0},
      // Charging (negative current) into a half-empty cell.
      {0.65, 0.7 / 3600.0, -1.0, 3600.0, 0.3 * 7488.0, 0.35 * 7488.0},
  };
  for (const Case& cs : cases) {
    double y1 = cs.y1, y2 = cs.y2;
    KibamStep(cs.c, cs.k_per_s, cs.current_a, cs.t_s, y1, y2);
    State ref = Integrate(cs.c, cs.k_per_s, cs.current_a, cs.t_s, {cs.y1, cs.y2});
    EXPECT_NEAR(y1, ref[0], 1e-6 * std::abs(ref[0])) << "c=" << cs.c << " I=" << cs.current_a;
    EXPECT_NEAR(y2, ref[1], 1e-6 * std::abs(ref[1])) << "c=" << cs.c << " I=" << cs.current_a;
  }
}

// Splitting an interval into many steps gives the same answer as one step:
// the closed form composes (what lets the simulator take any step length).
TEST(Kibam, StepsCompose) {
  double a1 = 6000, a2 = 3000, b1 = 6000, b2 = 3000;
  KibamStep(0.6, 1e-3, 1.7, 3000.0, a1, a2);
  for (int i = 0; i < 3000; ++i) KibamStep(0.6, 1e-3, 1.7, 1.0, b1, b2);
  EXPECT_NEAR(a1, b1, 1e-8 * a1);
  EXPECT_NEAR(a2, b2, 1e-8 * a2);
  // Charge is conserved: the total falls by exactly I·t.
  EXPECT_NEAR(a1 + a2, 9000.0 - 1.7 * 3000.0, 1e-6);
}

}  // namespace
}  // namespace kp::sim
