// Simulated-cell parameter files ("kneepoint-cell 1", TOML syntax) and the
// built-in chemistry presets.
//
// A parameter file describes one cell type: ratings, OCV table, impedance,
// Kinetic Battery Model wells, thermal constants, self-discharge, charge
// acceptance and the cell-to-cell spread of a batch. The built-in presets are
// such files compiled into the program (their text is also shipped in
// drivers/sim/presets/ for users to copy and fit); see DEVELOPERS.md
// "Adding a chemistry preset" for the keys.
//
// Errors name the source and line, and the key ("cells/x.toml:12: impedance.r0_mohm:
// must be > 0"). Unknown keys are errors, so a typo never silently falls back to a default.
// Functions here are pure apart from LoadCellFile reading its file; thread-safe.
#pragma once

#include <cstdint>
#include <string>
#include <string_view>
#include <vector>

#include "drivers/sim/cell_model.h"
#include "drivers/status.h"

namespace kp::sim {

// Cell-to-cell variation of a batch: one standard deviation, relative (0.02 = 2 %).
struct CellSpread {
  double capacity_rel = 0.0;
  double resistance_rel = 0.0;
  double self_discharge_rel = 0.0;
};

struct CellPreset {
  CellParams params;
  CellSpread spread;
};

// Parses parameter-file text; `source_name` prefixes error messages.
Result<CellPreset> ParseCellText(std::string_view text, std::string_view source_name);
// Reads and parses a parameter file.
Result<CellPreset> LoadCellFile(const std::string& path);

// Built-in presets by short name: "li-ion", "lifepo4", "nimh", "alkaline", "li-mno2".
std::vector<std::string> BuiltInCellNames();
Result<CellPreset> BuiltInCell(std::string_view name);
// The parameter-file text of a built-in preset (empty when unknown).
std::string_view BuiltInCellText(std::string_view name);

// A built-in preset name, or else a parameter-file path (what a command line
// or rig option names).
Result<CellPreset> LoadCell(std::string_view name_or_path);

// One cell of a batch: the nominal parameters varied by `spread`, drawn from a
// generator seeded with `seed` (same seed, same cell; different seeds differ).
// A zero spread returns the nominal cell unchanged.
CellParams VaryCell(const CellParams& nominal, const CellSpread& spread, uint64_t seed);

// The same design built to another rating: capacity, rated capacity and heat
// capacity scale with `rated_ah / cell.rated_ah`, resistances and the thermal
// resistance to ambient inversely (as cells in parallel would); voltages and
// time constants stay.
CellParams ScaleCell(const CellParams& cell, double rated_ah);

}  // namespace kp::sim
