// Behaviour of the simulated cells against published figures and textbook
// circuit/thermal results. Each check names its source.
#include "drivers/sim/cell_model.h"

#include <gtest/gtest.h>

#include <cmath>
#include <cstdio>
#include <string_view>

#include "drivers/sim/cell_file.h"
#include "tests/sim/sim_helpers.h"

namespace kp::sim {
namespace {

using testing::DischargeMah;
using testing::LogLogSlope;
using testing::TerminalV;

CellParams Preset(const char* name) {
  Result<CellPreset> p = BuiltInCell(name);
  EXPECT_TRUE(p.ok()) << p.status().ToString();
  return p.ok() ? p->params : CellParams{};
}

// Peukert exponent fitted over a series of constant drains: delivered
// Q = C_p · I^(1−k) (Peukert, Elektrotechnische Zeitschrift 1897, C_p = I^k·t;
// text). Rechargeable cells are taken over 1C, 0.5C,
// 0.2C and 0.1C of their rated capacity; alkaline cells over the drains their
// handbook curves cover for an AA, 0.1 A to 1 A (from memory).
std::vector<double> PeukertDrainsA(const CellParams& p) {
  if (p.chemistry == "alkaline") return {1.0, 0.5, 0.25, 0.1};
  return {1.0 * p.rated_ah, 0.5 * p.rated_ah, 0.2 * p.rated_ah, 0.1 * p.rated_ah};
}

double FittedPeukert(const CellParams& p) {
  std::vector<double> currents = PeukertDrainsA(p), charges;
  for (double i : currents) {
    CellModel m(p);
    charges.push_back(DischargeMah(m, i, p.cutoff_v));
  }
  return 1.0 - LogLogSlope(currents, charges);
}

struct PeukertBand {
  const char* preset;
  double lo, hi;
};

TEST(CellModel, PeukertBehaviourEmergesPerChemistry) {
  // Typical k: Li-ion about 1.05, NiMH 1.05-1.10 (secondary, battery handbooks' rate tables);
  // the band for Li-ion is the one stated for this check (1.02-1.10). LiFePO4
  // is taken like Li-ion (from memory). Alkaline primaries lose far more to
  // rate: k well above the secondary chemistries, 1.15-1.6 (from memory).
  const PeukertBand bands[] = {{"li-ion", 1.02, 1.10}, {"lifepo4", 1.02, 1.10}, {"nimh", 1.05, 1.10}, {"alkaline", 1.15, 1.60}};
  double k_li_ion = 0.0;
  for (const PeukertBand& b : bands) {
    double k = FittedPeukert(Preset(b.preset));
    std::printf("Peukert exponent %-9s k = %.3f\n", b.preset, k);
    EXPECT_GE(k, b.lo) << b.preset;
    EXPECT_LE(k, b.hi) << b.preset;
    if (std::string_view(b.preset) == "li-ion") k_li_ion = k;
    // Alkaline cells lose far more to rate than Li-ion: at least 0.1 more on k.
    if (std::string_view(b.preset) == "alkaline") EXPECT_GT(k, k_li_ion + 0.1);
  }
}

// Capacity at given drains against each preset's table of check values (the
// same table, with its sources, heads the preset file).
struct CapacityCheck {
  const char* preset;
  double current_a, end_v;
  double lo_mah, hi_mah;
  const char* source;
};

TEST(CellModel, CapacityAtDrainMatchesEachPresetsCheckValues) {
  const CapacityCheck checks[] = {
      // Alkaline AA to 0.9 V: handbook capacity-versus-drain curves, e.g.
      // Linden's Handbook of Batteries (from memory): roughly 1.0-1.3 Ah at
      // 1 A, most of the low-drain capacity at 100 mA, the whole of it at 25 mA.
      {"alkaline", 1.0, 0.9, 1000, 1300, "AA capacity at 1 A (from memory)"},
      {"alkaline", 0.1, 0.9, 2200, 2700, "AA capacity at 100 mA (from memory)"},
      {"alkaline", 0.025, 0.9, 2400, 2900, "AA capacity at 25 mA (from memory)"},
      // NiMH: a cell is rated at 0.2 It to 1.0 V (secondary), and the rating is
      // a minimum (common practice, no source): at least 100 %, at most the
      // stored charge.
      {"nimh", 0.4, 1.0, 2000, 2180, "rating at 0.2 It to 1.0 V (secondary)"},
      // Li-ion and LiFePO4 are rated at 0.2C to their cutoffs in the same way.
      {"li-ion", 0.5, 2.75, 2500, 2560, "rating at 0.2C to the cutoff (secondary)"},
      {"lifepo4", 0.6, 2.5, 3000, 3060, "rating at 0.2C to the cutoff (secondary)"},
  };
  for (const CapacityCheck& c : checks) {
    CellParams p = Preset(c.preset);
    CellModel m(p);
    const double mah = DischargeMah(m, c.current_a, c.end_v, c.current_a < 0.05 ? 10.0 : 1.0);
    std::printf("%-9s %6.3f A to %.2f V: %6.0f mAh (check %.0f-%.0f, %s)\n", c.preset, c.current_a, c.end_v, mah, c.lo_mah,
                c.hi_mah, c.source);
    EXPECT_GE(mah, c.lo_mah) << c.preset << " at " << c.current_a << " A";
    EXPECT_LE(mah, c.hi_mah) << c.preset << " at " << c.current_a << " A";
  }
}

// A coin cell is a high-impedance source: a radio burst of 45 mA for 300 ms
// pulls a fresh Li-MnO2 coin cell down by a few tenths of a volt (tens of ohms
// of internal resistance, from memory), and a light 0.2 mA drain delivers at
// least its rating to 2.0 V (IEC 60086 rates coin cells at such drains, from
// memory). Not in the Peukert check: at 1C (230 mA) its resistance drops it
// below the end voltage at once, so no rate series over 0.1-1C exists.
TEST(CellModel, CoinCellSagsUnderRadioBurstsAndDeliversItsRatingAtLightLoad) {
  CellParams p = Preset("li-mno2");
  CellModel m(p);
  double rest_v = m.OpenCircuitVoltage();
  for (int k = 0; k < 3; ++k) m.Advance(0.1, 0.045);
  double sag_v = rest_v - TerminalV(m, 0.045);
  std::printf("li-mno2 sag after 300 ms at 45 mA: %.3f V\n", sag_v);
  EXPECT_GT(sag_v, 0.2);
  EXPECT_LT(sag_v, 0.9);
  CellModel light(p);
  double mah = DischargeMah(light, 0.0002, p.cutoff_v, 10.0);
  std::printf("li-mno2 at 0.2 mA: %.1f mAh of %.0f rated\n", mah, p.rated_ah * 1000);
  EXPECT_GE(mah, p.rated_ah * 1000.0);
  EXPECT_LE(mah, p.capacity_ah * 1000.0);
}

// Rate-capacity effect of the KiBaM wells: a heavy continuous discharge stops
// at the cutoff with charge left in the bound well (Manwell & McGowan 1993).
TEST(CellModel, HeavyDischargeLeavesChargeInTheBoundWell) {
  CellParams p = Preset("li-ion");
  CellModel m(p);
  DischargeMah(m, 1.0 * p.rated_ah, p.cutoff_v);
  EXPECT_GT(m.bound_level() - m.available_level(), 0.05);
  EXPECT_GT(m.soc(), 0.03);
  // After a rest the wells equalise and the open-circuit voltage recovers.
  double v_end = m.OpenCircuitVoltage();
  for (int i = 0; i < 7200; ++i) m.Advance(1.0, 0.0);
  EXPECT_NEAR(m.bound_level(), m.available_level(), 1e-3);
  EXPECT_GT(m.OpenCircuitVoltage(), v_end + 0.1);
}

// Recovery effect (Manwell & McGowan 1993; common practice for pulsed loads):
// pulses at the peak current with rests in between deliver more charge to the
// cutoff than a continuous discharge at the same current.
// The rests are chosen against each chemistry's well time constant
// 1/k' = c(1−c)/k: minutes for the Li-ion preset, most of an hour for alkaline.
TEST(CellModel, PulsesWithRestsDeliverMoreThanContinuous) {
  struct Pattern {
    const char* preset;
    int on_s, rest_s;
  };
  for (const Pattern& pat : {Pattern{"li-ion", 60, 120}, Pattern{"alkaline", 300, 1800}}) {
    const char* name = pat.preset;
    CellParams p = Preset(name);
    const double peak_a = p.rated_ah;  // 1C
    CellModel cont(p);
    double continuous_mah = DischargeMah(cont, peak_a, p.cutoff_v);

    CellModel pulsed(p);
    double pulsed_as = 0.0;
    bool done = false;
    while (!done) {
      for (int s = 0; s < pat.on_s && !done; ++s) {
        if (TerminalV(pulsed, peak_a) <= p.cutoff_v)
          done = true;
        else
          pulsed.Advance(1.0, peak_a), pulsed_as += peak_a;
      }
      for (int s = 0; s < pat.rest_s && !done; ++s) pulsed.Advance(1.0, 0.0);
    }
    double pulsed_mah = pulsed_as / 3.6;
    std::printf("%s at 1C: continuous %.0f mAh, pulsed %d s on/%d s off %.0f mAh\n", name, continuous_mah, pat.on_s, pat.rest_s,
                pulsed_mah);
    EXPECT_GT(pulsed_mah, continuous_mah * 1.01) << name;
  }
}

// Recovery size in an intermittent test of the kind IEC 60086-2 application
// tests use (a load for a while each day, from memory): an alkaline AA at 1 A
// for 1 h a day gives clearly more than at 1 A continuously — handbook
// continuous-versus-intermittent curves show heavy-drain service rising by
// some tens of percent (from memory); checked as +10 % to +50 %. A Li-ion cell
// at 1C for 20 min a day (a whole hour would empty it at once), with its much
// smaller rate effect, changes by less than 5 % either way (its Peukert
// exponent near 1.05: secondary; the rests' small recovery is offset by the
// self-heating lost in them and two days of self-discharge).
TEST(CellModel, AlkalineRecoversStronglyInAnIntermittentTest) {
  struct Case {
    const char* preset;
    double current_a;
    int on_s;
    double lo, hi;  // pulsed / continuous − 1
  };
  for (const Case& c : {Case{"alkaline", 1.0, 3600, 0.10, 0.50}, Case{"li-ion", 2.5, 1200, -0.05, 0.05}}) {
    CellParams p = Preset(c.preset);
    CellModel cont(p);
    const double continuous_mah = DischargeMah(cont, c.current_a, p.cutoff_v);
    CellModel daily(p);
    double as = 0.0;
    bool done = false;
    while (!done) {
      for (int s = 0; s < c.on_s && !done; ++s) {
        if (TerminalV(daily, c.current_a) <= p.cutoff_v)
          done = true;
        else
          daily.Advance(1.0, c.current_a), as += c.current_a;
      }
      if (!done) daily.Advance(86400.0 - c.on_s, 0.0);
    }
    const double gain = as / 3.6 / continuous_mah - 1.0;
    std::printf("%-9s at %.1f A: continuous %.0f mAh, %d min a day %.0f mAh (%+.1f %%)\n", c.preset, c.current_a,
                continuous_mah, c.on_s / 60, as / 3.6, 100 * gain);
    EXPECT_GE(gain, c.lo) << c.preset;
    EXPECT_LE(gain, c.hi) << c.preset;
  }
}

// OCV hysteresis where the chemistry shows it: brought to half charge from
// above (discharging) and from below (charging), then rested 4 h, a LiFePO4
// and a NiMH cell rest apart by the gap their presets state (20 mV and 40 mV,
// from memory), within 20 %; a Li-ion cell, whose preset has none, within 2 mV
// (the remaining difference is the wells and heat, settled after the rest).
TEST(CellModel, HysteresisSeparatesRestVoltagesAfterChargeAndDischarge) {
  for (const char* name : {"lifepo4", "nimh", "li-ion"}) {
    CellParams p = Preset(name);
    p.self_discharge_per_month = 0.0;
    const double i = 0.2 * p.rated_ah;
    CellModel from_above(p);
    while (from_above.soc() > 0.5) from_above.Advance(1.0, i);
    p.initial_soc = 0.2;
    CellModel from_below(p);
    while (from_below.soc() < 0.5) from_below.Advance(1.0, -i);
    from_above.Advance(4 * 3600.0, 0.0);
    from_below.Advance(4 * 3600.0, 0.0);
    const double gap_v = from_below.OpenCircuitVoltage() - from_above.OpenCircuitVoltage();
    std::printf("%-9s rest voltage at half charge, after charging minus after discharging: %.1f mV\n", name, gap_v * 1e3);
    if (p.ocv_hysteresis_v > 0) {
      EXPECT_NEAR(gap_v, 2 * p.ocv_hysteresis_v, 0.2 * 2 * p.ocv_hysteresis_v) << name;
    } else {
      EXPECT_LT(std::abs(gap_v), 0.002) << name;
    }
  }
  EXPECT_GT(Preset("lifepo4").ocv_hysteresis_v, 0.0);
  EXPECT_GT(Preset("nimh").ocv_hysteresis_v, 0.0);
}

// A cell that barely changes over the test: large capacity, no Arrhenius or
// end-of-charge resistance rise, so the resistances stay put.
CellParams SteadyCell() {
  CellParams p = Preset("li-ion");
  p.capacity_ah = 1e4;
  p.activation_energy_j_per_mol = 0.0;
  p.resistance_rise_at_empty = 0.0;
  p.initial_soc = 0.5;
  return p;
}

// Maximum power transfer (textbook circuit theory; common practice, no
// source): a load equal to the source resistance gets half
// the open-circuit voltage. Just connected, the RC pairs hold no voltage and
// the source resistance is R0; once they have settled it is R0 + R1 + R2.
TEST(CellModel, MatchedLoadGetsHalfTheOpenCircuitVoltage) {
  CellModel m(SteadyCell());
  Thevenin t = m.Equivalent();
  double i = t.emf_v / (t.r_ohm + m.R0());
  EXPECT_NEAR(TerminalV(m, i), m.OpenCircuitVoltage() / 2.0, 1e-9);

  const double r_load = m.TotalResistance();
  for (int s = 0; s < 20 * 400; ++s) {  // 20 slow time constants
    t = m.Equivalent();
    double il = t.emf_v / (t.r_ohm + r_load);
    m.Advance(1.0, il);
  }
  t = m.Equivalent();
  double il = t.emf_v / (t.r_ohm + r_load);
  EXPECT_NEAR(TerminalV(m, il) / m.OpenCircuitVoltage(), 0.5, 1e-4);
}

// First-order thermal model C·dT/dt = P − ΔT/R_th (textbook lumped
// capacitance): the steady rise is P·R_th and 63.2 % of it is reached after
// one time constant C·R_th.
TEST(CellModel, ThermalRiseIsPowerTimesThermalResistance) {
  CellParams p = SteadyCell();
  CellModel m(p);
  const double heat_w = 0.8, tau_s = p.heat_capacity_j_per_k * p.thermal_resistance_k_per_w;
  double t = 0;
  for (; t < tau_s; t += 1.0) m.Advance(1.0, 0.0, heat_w);
  EXPECT_NEAR(m.temperature_c() - p.ambient_c, (1.0 - std::exp(-1.0)) * heat_w * p.thermal_resistance_k_per_w, 1e-6);
  for (; t < 30 * tau_s; t += 1.0) m.Advance(1.0, 0.0, heat_w);
  EXPECT_NEAR(m.temperature_c() - p.ambient_c, heat_w * p.thermal_resistance_k_per_w, 1e-6);
}

// Self-heating: at steady state the Joule heat I²·(R0+R1+R2)(T) balances the
// loss to ambient; with Arrhenius resistances that is a fixed point, found here
// independently by bisection.
TEST(CellModel, SelfHeatingSettlesWhereJouleHeatMeetsTheLoss) {
  CellParams p = SteadyCell();
  p.activation_energy_j_per_mol = 22000.0;
  CellModel m(p);
  const double i = 5.0;
  for (int s = 0; s < 30 * 900; ++s) m.Advance(1.0, i);
  const double r_sum = p.r0_ohm + p.r1_ohm + p.r2_ohm;
  auto arrhenius = [&](double t_c) {
    return std::exp(p.activation_energy_j_per_mol / 8.314462618 * (1.0 / (t_c + 273.15) - 1.0 / (p.reference_c + 273.15)));
  };
  double lo = p.ambient_c, hi = p.ambient_c + 50;
  for (int n = 0; n < 100; ++n) {
    double mid = 0.5 * (lo + hi);
    double excess = i * i * r_sum * arrhenius(mid) * p.thermal_resistance_k_per_w - (mid - p.ambient_c);
    (excess > 0 ? lo : hi) = mid;
  }
  EXPECT_NEAR(m.temperature_c(), lo, 2e-3);
  EXPECT_GT(m.temperature_c(), p.ambient_c + 1.0);
}

// Resistances follow Arrhenius: a cold cell reaches the cutoff sooner at 1C.
// The OCV moves only mildly with temperature (its coefficient, per kelvin).
TEST(CellModel, ColdCellsDeliverLessAtHighRate) {
  CellParams warm = Preset("li-ion"), cold = warm;
  cold.ambient_c = 0.0;
  CellModel mw(warm), mc(cold);
  EXPECT_GT(mc.R0(), 1.5 * mw.R0());
  EXPECT_NEAR(mc.OpenCircuitVoltage() - mw.OpenCircuitVoltage(), -25.0 * warm.ocv_temp_coeff_v_per_k, 1e-9);
  EXPECT_LT(std::abs(mc.OpenCircuitVoltage() - mw.OpenCircuitVoltage()), 0.02);
  double q_warm = DischargeMah(mw, warm.rated_ah, warm.cutoff_v);
  double q_cold = DischargeMah(mc, cold.rated_ah, cold.cutoff_v);
  EXPECT_LT(q_cold, 0.97 * q_warm);
}

// Capacity in the cold against the Li-ion preset's check values: at 0.5C a
// cell in 0 degC surroundings delivers 80-95 % and at -20 degC 60-85 % of what
// it delivers at 25 degC (typical datasheet low-temperature discharge curves,
// from memory). The cell starts at the ambient temperature and warms itself.
TEST(CellModel, ColdDeratingMatchesTheLiIonCheckValues) {
  const CellParams warm = Preset("li-ion");
  auto delivered = [&](double ambient_c) {
    CellParams p = warm;
    p.ambient_c = ambient_c;
    CellModel m(p);
    return DischargeMah(m, 0.5 * p.rated_ah, p.cutoff_v);
  };
  const double q25 = delivered(25.0), q0 = delivered(0.0), q_minus20 = delivered(-20.0);
  std::printf("li-ion at 0.5C: 25 degC %.0f mAh, 0 degC %.0f mAh (%.0f %%), -20 degC %.0f mAh (%.0f %%)\n", q25, q0,
              100 * q0 / q25, q_minus20, 100 * q_minus20 / q25);
  EXPECT_GE(q0 / q25, 0.80);
  EXPECT_LE(q0 / q25, 0.95);
  EXPECT_GE(q_minus20 / q25, 0.60);
  EXPECT_LE(q_minus20 / q25, 0.85);
}

// Ratings of the presets against published chemistry facts (shared
// references, 'Chemistry facts', secondary: datasheets): Li-ion 3.6-3.7 V
// nominal, 4.2 V charge, 2.75-3.0 V cutoff (2.5-3.0 V accepted for NMC);
// LiFePO4 3.2-3.3 V, 3.65 V, 2.5 V; NiMH 1.2 V, 1.0 V end; alkaline 1.5 V,
// 0.8-1.0 V end; Li-MnO2 coin cells 3.0 V nominal, 2.0 V end (from memory).
// The model must live up to them: the mean voltage of a 0.2C discharge sits
// at the nominal voltage, and a full rechargeable cell rests at its charge
// voltage; a fresh alkaline cell rests at 1.5-1.65 V and a fresh Li-MnO2 cell
// at 3.1-3.35 V (from memory).
TEST(CellModel, RatingsMatchPublishedChemistryFacts) {
  struct Fact {
    const char* preset;
    double nominal_lo, nominal_hi, full_v, cutoff_lo, cutoff_hi;
    double fresh_lo = 0.0, fresh_hi = 0.0;  // primaries: open-circuit voltage when new
  };
  const Fact facts[] = {{"li-ion", 3.6, 3.7, 4.2, 2.5, 3.0},
                        {"lifepo4", 3.2, 3.3, 3.65, 2.5, 2.5},
                        {"nimh", 1.2, 1.2, 0.0, 1.0, 1.0},
                        {"alkaline", 1.5, 1.5, 0.0, 0.8, 1.0, 1.5, 1.65},
                        {"li-mno2", 3.0, 3.0, 0.0, 2.0, 2.0, 3.1, 3.35}};
  for (const Fact& f : facts) {
    CellParams p = Preset(f.preset);
    EXPECT_GE(p.nominal_v, f.nominal_lo) << f.preset;
    EXPECT_LE(p.nominal_v, f.nominal_hi) << f.preset;
    EXPECT_GE(p.cutoff_v, f.cutoff_lo) << f.preset;
    EXPECT_LE(p.cutoff_v, f.cutoff_hi) << f.preset;
    if (f.full_v > 0) {
      EXPECT_DOUBLE_EQ(p.full_v, f.full_v) << f.preset;
    }

    CellModel m(p);
    if (p.rechargeable) {
      EXPECT_NEAR(m.OpenCircuitVoltage(), p.full_v, 0.06) << f.preset;
      // Mean voltage over a 0.2C discharge (energy / charge).
      const double i = 0.2 * p.rated_ah;
      double v_sum = 0;
      long n = 0;
      while (TerminalV(m, i) > p.cutoff_v) {
        v_sum += TerminalV(m, i);
        m.Advance(1.0, i);
        ++n;
      }
      double mean_v = v_sum / n;
      std::printf("%-9s mean voltage at 0.2C %.3f V\n", f.preset, mean_v);
      EXPECT_GE(mean_v, f.nominal_lo - 0.05) << f.preset;
      EXPECT_LE(mean_v, f.nominal_hi + 0.06) << f.preset;
    } else {
      EXPECT_GE(m.OpenCircuitVoltage(), f.fresh_lo) << f.preset;
      EXPECT_LE(m.OpenCircuitVoltage(), f.fresh_hi) << f.preset;
    }
  }
}

// Self-discharge over a month's rest (30.44 days, analysis/calendar.h) against the published monthly figures
// (cell makers' datasheets and handbook tables, secondary): Li-ion 2-3 %/month, NiMH
// about 30 %/month, alkaline under 2 %/year, lithium primaries about 10 % in
// 5 years. LiFePO4 taken like Li-ion (from memory). The model loses exactly
// its file's figure.
TEST(CellModel, SelfDischargeOverAMonthMatchesTheChemistry) {
  struct Band {
    const char* preset;
    double lo, hi;  // fraction lost in a month
  };
  const Band bands[] = {{"li-ion", 0.02, 0.03}, {"lifepo4", 0.01, 0.03}, {"nimh", 0.2, 0.4}, {"alkaline", 0.0, 0.02 / 12},
                        {"li-mno2", 0.05 / 60, 0.15 / 60}};
  for (const Band& b : bands) {
    CellParams p = Preset(b.preset);
    CellModel m(p);
    // 730.5 h: 365.25 days / 12, written out here rather than taken from the constant.
    for (int h = 0; h < 730; ++h) m.Advance(3600.0, 0.0);
    m.Advance(1800.0, 0.0);
    double lost = 1.0 - m.soc();
    EXPECT_NEAR(lost, p.self_discharge_per_month, 1e-9) << b.preset;
    EXPECT_GT(lost, b.lo) << b.preset;
    EXPECT_LE(lost, b.hi) << b.preset;
  }
}

// Charge acceptance: a negative current stores charge (times the efficiency)
// and raises the OCV; a full cell stores no more and turns the excess into
// heat; a primary cell stores nothing.
TEST(CellModel, ChargingStoresChargeUpToFull) {
  CellParams p = Preset("li-ion");
  p.initial_soc = 0.5;
  p.self_discharge_per_month = 0.0;
  CellModel m(p);
  double v0 = m.OpenCircuitVoltage();
  for (int s = 0; s < 600; ++s) m.Advance(1.0, -1.0);
  EXPECT_NEAR(m.soc(), 0.5 + 600.0 * p.charge_efficiency / (p.capacity_ah * 3600.0), 1e-6);
  EXPECT_GT(m.OpenCircuitVoltage(), v0 + 0.01);

  p.initial_soc = 1.0;
  CellModel full(p);
  for (int s = 0; s < 3600; ++s) full.Advance(1.0, -1.0);
  EXPECT_LE(full.soc(), 1.0 + 1e-12);
  EXPECT_LE(full.OpenCircuitVoltage(), p.full_v + 1e-9);
  EXPECT_GT(full.temperature_c(), p.ambient_c + 10.0);  // ~4 W of overcharge heat

  CellParams a = Preset("alkaline");
  a.initial_soc = 0.5;
  CellModel primary(a);
  for (int s = 0; s < 600; ++s) primary.Advance(1.0, -0.5);
  EXPECT_LE(primary.soc(), 0.5);
}

// Cell-to-cell variation: the same seed gives the same cell, other seeds a
// batch whose spread matches the file's (sample of 400, fixed seeds).
TEST(CellModel, BatchVariesRepeatably) {
  Result<CellPreset> preset = BuiltInCell("li-ion");
  ASSERT_TRUE(preset.ok());
  CellParams a = VaryCell(preset->params, preset->spread, 7);
  CellParams b = VaryCell(preset->params, preset->spread, 7);
  CellParams c = VaryCell(preset->params, preset->spread, 8);
  EXPECT_EQ(a.capacity_ah, b.capacity_ah);
  EXPECT_EQ(a.r0_ohm, b.r0_ohm);
  EXPECT_NE(a.capacity_ah, c.capacity_ah);
  EXPECT_NE(a.r0_ohm, c.r0_ohm);
  double sum = 0, sum2 = 0;
  const int n = 400;
  for (int seed = 1; seed <= n; ++seed) {
    double rel = VaryCell(preset->params, preset->spread, seed).capacity_ah / preset->params.capacity_ah - 1.0;
    sum += rel, sum2 += rel * rel;
  }
  double mean = sum / n, sd = std::sqrt(sum2 / n - mean * mean);
  EXPECT_NEAR(mean, 0.0, 3.0 * preset->spread.capacity_rel / std::sqrt(n));
  EXPECT_NEAR(sd, preset->spread.capacity_rel, 0.15 * preset->spread.capacity_rel);
  CellParams same = VaryCell(preset->params, CellSpread{}, 99);
  EXPECT_EQ(same.capacity_ah, preset->params.capacity_ah);
}

}  // namespace
}  // namespace kp::sim
