// Parameter files of simulated cells: the built-in presets, their shipped
// copies, and error messages that point at the file, line and key.
#include "drivers/sim/cell_file.h"

#include <gtest/gtest.h>

#include <algorithm>
#include <filesystem>
#include <fstream>
#include <set>
#include <sstream>

#include "tests/support/test_support.h"

namespace kp::sim {
namespace {

std::string LiIonText() { return std::string(BuiltInCellText("li-ion")); }

// 1-based line of the first occurrence of `needle` in `text`.
int LineOf(const std::string& text, const std::string& needle) {
  size_t pos = text.find(needle);
  EXPECT_NE(pos, std::string::npos) << needle;
  return 1 + static_cast<int>(std::count(text.begin(), text.begin() + static_cast<long>(pos), '\n'));
}

std::string Replace(std::string text, const std::string& from, const std::string& to) {
  size_t pos = text.find(from);
  EXPECT_NE(pos, std::string::npos) << from;
  if (pos != std::string::npos) text.replace(pos, from.size(), to);
  return text;
}

Status ParseError(const std::string& text) {
  Result<CellPreset> r = ParseCellText(text, "cells/test.toml");
  EXPECT_FALSE(r.ok());
  return r.status();
}

TEST(CellFile, EveryBuiltInPresetLoads) {
  std::vector<std::string> names = BuiltInCellNames();
  ASSERT_EQ(names.size(), 5u);
  for (const std::string& n : names) {
    Result<CellPreset> p = BuiltInCell(n);
    ASSERT_TRUE(p.ok()) << p.status().ToString();
    EXPECT_EQ(p->params.ocv_table.size() >= 2, true);
    EXPECT_GT(p->params.capacity_ah, 0.0);
  }
  EXPECT_EQ(BuiltInCell("lead-acid").status().code(), StatusCode::kNotFound);
  EXPECT_NE(BuiltInCell("lead-acid").status().message().find("li-ion"), std::string::npos);
}

TEST(CellFile, DemoCellIsTheLiIonPreset) {
  CellParams demo = DemoLiIonCell(2.4);
  Result<CellPreset> p = BuiltInCell("li-ion");
  ASSERT_TRUE(p.ok());
  EXPECT_EQ(demo.capacity_ah, 2.4);
  EXPECT_EQ(demo.r0_ohm, p->params.r0_ohm);
  EXPECT_EQ(demo.name, p->params.name);
  EXPECT_DOUBLE_EQ(p->params.r0_ohm, 0.045);              // 45 mOhm in the file
  EXPECT_DOUBLE_EQ(p->params.kibam_k_per_s, 1.3 / 3600);  // per hour in the file
}

// The files under drivers/sim/presets are what users copy and what the
// program compiles in: every file is a built-in preset under its short name
// (its stem, '_' read as '-'), every built-in comes from a file, and each
// loads as a cell file.
TEST(CellFile, EveryShippedPresetFileIsBuiltIn) {
  std::vector<std::string> names = BuiltInCellNames();
  std::set<std::string> from_files;
  for (const auto& entry : std::filesystem::directory_iterator(testing::SourcePath("drivers/sim/presets"))) {
    if (entry.path().extension() != ".toml") continue;
    std::string name = entry.path().stem().string();
    std::replace(name.begin(), name.end(), '_', '-');
    from_files.insert(name);
    std::ifstream in(entry.path());
    std::stringstream ss;
    ss << in.rdbuf();
    EXPECT_EQ(ss.str(), std::string(BuiltInCellText(name))) << entry.path();
    Result<CellPreset> loaded = LoadCellFile(entry.path().string());
    ASSERT_TRUE(loaded.ok()) << loaded.status().ToString();
    EXPECT_EQ(loaded->params.chemistry, name) << "a preset's short name is its chemistry";
  }
  EXPECT_EQ(from_files, std::set<std::string>(names.begin(), names.end()));
  EXPECT_EQ(names.front(), "li-ion");  // the default, listed first
}

TEST(CellFile, UserFileOverridesValues) {
  testing::TempDir dir;
  std::string path = dir.File("mine.toml");
  {
    std::ofstream out(path);
    out << Replace(LiIonText(), "capacity_mah = 2560", "capacity_mah = 3100");
  }
  Result<CellPreset> p = LoadCellFile(path);
  ASSERT_TRUE(p.ok()) << p.status().ToString();
  EXPECT_DOUBLE_EQ(p->params.capacity_ah, 3.1);
  Result<CellPreset> missing = LoadCellFile(dir.File("absent.toml"));
  ASSERT_FALSE(missing.ok());
  EXPECT_NE(missing.status().message().find("absent.toml"), std::string::npos) << missing.status().ToString();
}

TEST(CellFile, UnknownKeyNamesFileLineAndKey) {
  std::string text = Replace(LiIonText(), "r0_mohm = 45", "r0_mhom = 45");
  Status st = ParseError(text);
  EXPECT_EQ(st.code(), StatusCode::kInvalidInput);
  std::string want = "cells/test.toml:" + std::to_string(LineOf(text, "r0_mhom")) + ": impedance.r0_mhom: unknown key";
  EXPECT_NE(st.message().find(want), std::string::npos) << st.message();
}

TEST(CellFile, OutOfRangeValueNamesLineAndKey) {
  std::string text = Replace(LiIonText(), "available_fraction = 0.7", "available_fraction = 1.7");
  Status st = ParseError(text);
  std::string want =
      "cells/test.toml:" + std::to_string(LineOf(text, "available_fraction")) + ": wells.available_fraction: 1.7 is out of range";
  EXPECT_NE(st.message().find(want), std::string::npos) << st.message();
}

TEST(CellFile, WrongTypeNamesLineAndKey) {
  std::string text = Replace(LiIonText(), "fast_tau_s = 8", "fast_tau_s = \"8\"");
  Status st = ParseError(text);
  std::string want = "cells/test.toml:" + std::to_string(LineOf(text, "fast_tau_s")) + ": impedance.fast_tau_s: must be a number";
  EXPECT_NE(st.message().find(want), std::string::npos) << st.message();
}

TEST(CellFile, MissingKeyNamesItsSection) {
  std::string text = Replace(LiIonText(), "capacity_mah = 2560\n", "");
  Status st = ParseError(text);
  std::string want = "cells/test.toml:" + std::to_string(LineOf(text, "[store]")) + ": store.capacity_mah: missing";
  EXPECT_NE(st.message().find(want), std::string::npos) << st.message();
}

TEST(CellFile, SyntaxErrorNamesLineAndColumn) {
  std::string text = Replace(LiIonText(), "cutoff_v = 2.75", "cutoff_v = 2.75 V");
  Status st = ParseError(text);
  std::string want = "cells/test.toml:" + std::to_string(LineOf(text, "cutoff_v")) + ":";
  EXPECT_EQ(st.message().rfind(want, 0), 0u) << st.message();
}

TEST(CellFile, OcvTableIsChecked) {
  std::string text = Replace(LiIonText(), "volts = [2.5000, 2.8080,", "volts = [2.8080,");
  Status st = ParseError(text);
  EXPECT_NE(st.message().find(std::to_string(LineOf(text, "volts")) + ": ocv.volts: has 9 values but ocv.level has 10"),
            std::string::npos)
      << st.message();
  text = Replace(LiIonText(), "volts = [2.5000, 2.8080,", "volts = [2.9000, 2.8080,");
  st = ParseError(text);
  EXPECT_NE(st.message().find("ocv.volts: must not fall as the level rises (element 2)"), std::string::npos) << st.message();
  text = Replace(LiIonText(), "level = [0.0, 0.0050,", "level = [0.1, 0.0050,");
  st = ParseError(text);
  EXPECT_NE(st.message().find("ocv.level: must run from 0 to 1"), std::string::npos) << st.message();
}

TEST(CellFile, RatingsAndChargeAcceptanceMustAgree) {
  Status st = ParseError(Replace(LiIonText(), "cutoff_v = 2.75", "cutoff_v = 3.9"));
  EXPECT_NE(st.message().find("cutoff_v < nominal_v <= full_v"), std::string::npos) << st.message();
  st = ParseError(Replace(std::string(BuiltInCellText("alkaline")), "charge_efficiency_pct = 0", "charge_efficiency_pct = 50"));
  EXPECT_NE(st.message().find("a primary cell stores no charge"), std::string::npos) << st.message();
  st = ParseError(Replace(LiIonText(), "format = \"kneepoint-cell 1\"", "format = \"kneepoint-cell 9\""));
  EXPECT_NE(st.message().find("format: unsupported"), std::string::npos) << st.message();
}

// The wells' own activation energy is optional (absent: the resistances'
// value); when given it is range-checked like any key.
TEST(CellFile, WellActivationEnergyIsOptionalAndChecked) {
  Result<CellPreset> with = ParseCellText(LiIonText(), "li.toml");
  ASSERT_TRUE(with.ok()) << with.status().ToString();
  EXPECT_DOUBLE_EQ(with->params.kibam_activation_energy_j_per_mol, 45000.0);
  Result<CellPreset> without = ParseCellText(Replace(LiIonText(), "exchange_activation_kj_per_mol = 45\n", ""), "li.toml");
  ASSERT_TRUE(without.ok()) << without.status().ToString();
  EXPECT_LT(without->params.kibam_activation_energy_j_per_mol, 0.0);
  std::string text = Replace(LiIonText(), "exchange_activation_kj_per_mol = 45", "exchange_activation_kj_per_mol = 450");
  Status st = ParseError(text);
  std::string want = "cells/test.toml:" + std::to_string(LineOf(text, "exchange_activation_kj_per_mol")) +
                     ": wells.exchange_activation_kj_per_mol: 450 is out of range";
  EXPECT_NE(st.message().find(want), std::string::npos) << st.message();
}

// OCV hysteresis is optional (absent: none) and range-checked.
TEST(CellFile, HysteresisIsOptionalAndChecked) {
  const std::string lfp(BuiltInCellText("lifepo4"));
  Result<CellPreset> with = ParseCellText(lfp, "lfp.toml");
  ASSERT_TRUE(with.ok()) << with.status().ToString();
  EXPECT_DOUBLE_EQ(with->params.ocv_hysteresis_v, 0.010);
  Result<CellPreset> without =
      ParseCellText(Replace(Replace(lfp, "hysteresis_mv = 10\n", ""), "hysteresis_span = 0.05\n", ""), "lfp.toml");
  ASSERT_TRUE(without.ok()) << without.status().ToString();
  EXPECT_EQ(without->params.ocv_hysteresis_v, 0.0);
  std::string text = Replace(lfp, "hysteresis_span = 0.05", "hysteresis_span = 0");
  Status st = ParseError(text);
  EXPECT_NE(st.message().find("cells/test.toml:" + std::to_string(LineOf(text, "hysteresis_span")) + ": ocv.hysteresis_span"),
            std::string::npos)
      << st.message();
}

TEST(CellFile, SpreadIsOptional) {
  std::string text = LiIonText();
  text = text.substr(0, text.find("[spread]"));
  Result<CellPreset> p = ParseCellText(text, "nospread.toml");
  ASSERT_TRUE(p.ok()) << p.status().ToString();
  EXPECT_EQ(p->spread.capacity_rel, 0.0);
}

}  // namespace
}  // namespace kp::sim

namespace kp::sim {
namespace {

// Cells of one design in parallel: twice the rating stores twice the charge
// behind half the resistance (Ohm's law for parallel paths, textbook).
TEST(ScaleCell, ParallelDesignRule) {
  auto li = BuiltInCell("li-ion");
  ASSERT_TRUE(li.ok());
  const CellParams& a = li->params;
  CellParams b = ScaleCell(a, 2.0 * a.rated_ah);
  EXPECT_DOUBLE_EQ(b.capacity_ah, 2.0 * a.capacity_ah);
  EXPECT_DOUBLE_EQ(b.rated_ah, 2.0 * a.rated_ah);
  EXPECT_DOUBLE_EQ(b.r0_ohm, a.r0_ohm / 2.0);
  EXPECT_DOUBLE_EQ(b.r2_ohm, a.r2_ohm / 2.0);
  EXPECT_DOUBLE_EQ(b.tau1_s, a.tau1_s);
  EXPECT_EQ(b.ocv_table, a.ocv_table);
  CellParams same = ScaleCell(a, 0.0);  // no rating: unchanged
  EXPECT_DOUBLE_EQ(same.capacity_ah, a.capacity_ah);
}

}  // namespace
}  // namespace kp::sim
