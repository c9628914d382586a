// Built-in chemistry presets: the text of drivers/sim/presets/*.toml compiled
// in (tests/sim/cell_file_test.cpp checks that both copies agree, so edit the
// .toml file and paste it here). Internal to cell_file.cpp.
#pragma once

#include <string_view>

namespace kp::sim {

struct PresetText {
  std::string_view name;
  std::string_view file;
  std::string_view text;
};

inline constexpr PresetText kPresetTexts[] = {
    {"li-ion", "li_ion.toml", R"kpcell(# Kneepoint simulated cell: "Linnet N25", an invented NMC-like 18650 (not a real product).
# Values are demo figures shaped after published magnitudes; fit your own cell by copying this file.
format = "kneepoint-cell 1"

[identity]
name = "Linnet N25 (simulated NMC 18650)"
chemistry = "li-ion"
rechargeable = true

[rating]
rated_mah = 2500
nominal_v = 3.65
full_v = 4.20
cutoff_v = 2.75

[store]
capacity_mah = 2560
self_discharge_pct_per_month = 2.5
charge_efficiency_pct = 99.5
initial_level = 1.0

[ocv]
# Shape: Ni-rich pseudo-OCV breakpoints, Sunil, Pattipati & Balasingam, IEEE TIM 2025 (secondary).
level = [0.0, 0.0050, 0.0352, 0.0854, 0.1357, 0.2915, 0.4523, 0.8392, 0.9548, 1.0]
volts = [2.5000, 2.8080, 3.1179, 3.3182, 3.4193, 3.5826, 3.6941, 4.0664, 4.1121, 4.2000]
temp_coeff_mv_per_k = -0.2
reference_c = 25.0

[impedance]
r0_mohm = 45
fast_mohm = 12
fast_tau_s = 8
slow_mohm = 18
slow_tau_s = 400
activation_kj_per_mol = 22
empty_rise = 1.0
empty_rise_width = 0.05

[wells]
available_fraction = 0.7
exchange_per_hour = 1.3

[thermal]
heat_capacity_j_per_k = 45
to_ambient_k_per_w = 20
ambient_c = 25

[spread]
capacity_pct = 1.5
resistance_pct = 6
self_discharge_pct = 20
)kpcell"},
    {"lifepo4", "lifepo4.toml", R"kpcell(# Kneepoint simulated cell: "Ferrow P30", an invented LiFePO4 26650 (not a real product).
# Values are demo figures shaped after published magnitudes; fit your own cell by copying this file.
format = "kneepoint-cell 1"

[identity]
name = "Ferrow P30 (simulated LiFePO4 26650)"
chemistry = "lifepo4"
rechargeable = true

[rating]
rated_mah = 3000
nominal_v = 3.2
full_v = 3.65
cutoff_v = 2.5

[store]
capacity_mah = 3060
self_discharge_pct_per_month = 2.0
charge_efficiency_pct = 99.5
initial_level = 1.0

[ocv]
# Shape: LFP pseudo-OCV breakpoints, Sunil, Pattipati & Balasingam, IEEE TIM 2025 (secondary).
level = [0.0, 0.0033, 0.0117, 0.0267, 0.0534, 0.0885, 0.2972, 0.9833, 0.9950, 1.0]
volts = [2.0102, 2.4177, 2.7405, 2.9299, 3.0872, 3.1942, 3.2772, 3.3511, 3.4180, 3.5981]
temp_coeff_mv_per_k = -0.1
reference_c = 25.0

[impedance]
r0_mohm = 20
fast_mohm = 8
fast_tau_s = 10
slow_mohm = 12
slow_tau_s = 500
activation_kj_per_mol = 25
empty_rise = 1.0
empty_rise_width = 0.05

[wells]
available_fraction = 0.75
exchange_per_hour = 0.9

[thermal]
heat_capacity_j_per_k = 85
to_ambient_k_per_w = 15
ambient_c = 25

[spread]
capacity_pct = 1.0
resistance_pct = 5
self_discharge_pct = 20
)kpcell"},
    {"nimh", "nimh.toml", R"kpcell(# Kneepoint simulated cell: "Nimbet H20", an invented NiMH AA (not a real product).
# Values are demo figures shaped after published magnitudes; fit your own cell by copying this file.
format = "kneepoint-cell 1"

[identity]
name = "Nimbet H20 (simulated NiMH AA)"
chemistry = "nimh"
rechargeable = true

[rating]
rated_mah = 2000
nominal_v = 1.2
full_v = 1.45
cutoff_v = 1.0

[store]
capacity_mah = 2080
self_discharge_pct_per_month = 30
charge_efficiency_pct = 80
initial_level = 1.0

[ocv]
# Invented demo curve with the usual NiMH plateau around 1.2-1.3 V (from memory).
level = [0.0, 0.02, 0.05, 0.10, 0.20, 0.40, 0.60, 0.80, 0.90, 0.97, 1.0]
volts = [0.95, 1.10, 1.16, 1.19, 1.22, 1.245, 1.265, 1.29, 1.32, 1.37, 1.41]
temp_coeff_mv_per_k = -0.4
reference_c = 25.0

[impedance]
r0_mohm = 25
fast_mohm = 10
fast_tau_s = 5
slow_mohm = 15
slow_tau_s = 300
activation_kj_per_mol = 20
empty_rise = 1.0
empty_rise_width = 0.05

[wells]
available_fraction = 0.65
exchange_per_hour = 0.7

[thermal]
heat_capacity_j_per_k = 24
to_ambient_k_per_w = 35
ambient_c = 25

[spread]
capacity_pct = 2.5
resistance_pct = 8
self_discharge_pct = 25
)kpcell"},
    {"alkaline", "alkaline.toml", R"kpcell(# Kneepoint simulated cell: "Alkora A24", an invented alkaline AA primary cell (not a real product).
# Values are demo figures shaped after published magnitudes; fit your own cell by copying this file.
format = "kneepoint-cell 1"

[identity]
name = "Alkora A24 (simulated alkaline AA)"
chemistry = "alkaline"
rechargeable = false

[rating]
rated_mah = 2400
nominal_v = 1.5
full_v = 1.6
cutoff_v = 0.9

[store]
capacity_mah = 2700
self_discharge_pct_per_month = 0.15
charge_efficiency_pct = 0
initial_level = 1.0

[ocv]
# Invented demo curve: an alkaline cell slopes steadily from about 1.6 V (from memory).
level = [0.0, 0.05, 0.10, 0.20, 0.40, 0.60, 0.80, 0.95, 1.0]
volts = [0.80, 1.00, 1.08, 1.17, 1.28, 1.37, 1.46, 1.55, 1.60]
temp_coeff_mv_per_k = -0.3
reference_c = 25.0

[impedance]
r0_mohm = 60
fast_mohm = 15
fast_tau_s = 3
slow_mohm = 30
slow_tau_s = 200
activation_kj_per_mol = 15
empty_rise = 1.5
empty_rise_width = 0.3

[wells]
available_fraction = 0.4
exchange_per_hour = 0.4

[thermal]
heat_capacity_j_per_k = 22
to_ambient_k_per_w = 35
ambient_c = 25

[spread]
capacity_pct = 2
resistance_pct = 8
self_discharge_pct = 20
)kpcell"},
};

}  // namespace kp::sim
