#include "rig/stuck_watch.h"

#include <fmt/format.h>

namespace kp {

double StuckChargeShare(std::string_view c) {
  if (c == "lifepo4") return 0.05;
  if (c == "nimh" || c == "nicd") return 0.03;
  if (c == "li-ion" || c == "lipo" || c == "alkaline" || c == "li-mno2") return 0.01;
  return 0.03;  // unknown chemistry: as flat as NiMH
}

StuckWatch::StuckWatch(double rated_mah, std::string_view chemistry)
    : limit_mah_(StuckChargeShare(chemistry) * (rated_mah > 0 ? rated_mah : 1000.0)) {}

std::optional<std::string> StuckWatch::Observe(double voltage_v, double discharged_mah) {
  if (!(discharged_mah > 0.0)) return std::nullopt;
  if (last_v_ && voltage_v == *last_v_) {
    ++same_;
    moved_mah_ += discharged_mah;
  } else {
    last_v_ = voltage_v;
    same_ = 1;
    moved_mah_ = 0.0;
  }
  if (same_ >= kStuckMinReadings && moved_mah_ > limit_mah_)
    return fmt::format("the cell voltage read exactly {:.6g} V {} times in a row while {:.1f} mAh were discharged "
                       "(limit {:.1f} mAh): the reading looks stuck",
                       voltage_v, same_, moved_mah_, limit_mah_);
  return std::nullopt;
}

}  // namespace kp
