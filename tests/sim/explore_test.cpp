#include <gtest/gtest.h>
#include <cstdio>
#include "drivers/sim/cell_file.h"
#include "tests/sim/sim_helpers.h"
namespace kp::sim {
TEST(Explore, Peukert) {
  for (auto name : BuiltInCellNames()) {
    auto p = BuiltInCell(name);
    ASSERT_TRUE(p.ok()) << p.status().ToString();
    std::vector<double> rates = {1.0, 0.5, 0.2, 0.1}, is, qs;
    for (double r : rates) {
      CellModel m(p->params);
      double i = r * p->params.rated_ah;
      double q = testing::DischargeMah(m, i, p->params.cutoff_v);
      is.push_back(i); qs.push_back(q);
      printf("%s %.1fC: %.0f mAh, T=%.1f, bound left %.3f avail %.3f\n", name.c_str(), r, q, m.temperature_c(), m.bound_level(), m.available_level());
    }
    printf("%s k=%.3f\n", name.c_str(), 1 - testing::LogLogSlope(is, qs));
  }
}
}
