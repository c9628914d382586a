// Stuck-reading detection, on for every run: a voltage reading that stays
// exactly the same while the cell is being discharged is a frozen meter, not
// a flat curve, once more charge has moved than the flattest part of the
// chemistry's curve allows at the instrument's last digit. Measured in charge,
// the limit is the same at any rate (a faster discharge reaches it in fewer
// readings), so it is rate-aware without a per-rate table.
#pragma once

#include <optional>
#include <string>
#include <string_view>

namespace kp {

// Share of the rated capacity that may pass with the voltage reading exactly
// unchanged. Plateau slopes (from memory): Li-ion about 5 mV per % of
// capacity mid-curve, NiMH about 1-2 mV/%, LiFePO4 under 0.5 mV/% on its
// plateau; alkaline and Li-MnO2 primaries slope steadily. The shares give a
// few counts of a 1 mV resolution reading on each (common practice, no source).
double StuckChargeShare(std::string_view chemistry);

// Fewer identical readings than this are never called stuck (a slow meter
// may repeat a value a few times).
inline constexpr int kStuckMinReadings = 10;

class StuckWatch {
 public:
  StuckWatch(double rated_mah, std::string_view chemistry);
  // One reading: its voltage and the charge discharged since the previous
  // one (mAh, > 0 discharging). Returns why the reading looks stuck, once the
  // limit is passed; nothing otherwise. Readings without discharge (rest,
  // charge under constant voltage) neither count nor reset.
  std::optional<std::string> Observe(double voltage_v, double discharged_mah);
  double limit_mah() const { return limit_mah_; }

 private:
  double limit_mah_;
  std::optional<double> last_v_;
  int same_ = 0;
  double moved_mah_ = 0.0;
};

}  // namespace kp
