// Reconciliation: what the load (and the supply) report they hold, compared
// with what the run commanded. The run reads them back after every output
// change and periodically: an instrument that acknowledged a command but did
// not act on it, a second client that changed it, a reset (*RST) or a cleared
// protection is a mismatch.
//
// Which read-backs an instrument answers is found out, not assumed: each is
// tried once while the load is still off, and one the instrument does not
// answer (no reply, an error, a reply that is not a state/mode/number) is
// skipped from then on and named in `skipped()` (the run records it). After
// a read-back has answered once, a failure is an error.
#pragma once

#include <optional>
#include <string>
#include <utility>
#include <vector>

#include "drivers/roles.h"
#include "drivers/supply.h"

namespace kp {

// What the run has commanded.
struct CommandedState {
  bool load_on = false;
  std::optional<LoadMode> mode;  // set once a level was sent
  double level = 0.0;            // A, Ohm or W
  bool supply_on = false;
  std::optional<double> supply_v, supply_a;
  std::vector<std::pair<LoadGuard, double>> guards;  // armed values
};

// Two settings are the same when within 1 % or 2 digits of the least one
// an instrument usually shows (1 mA, 1 mV, 0.01 W/Ohm): a setpoint comes back
// rounded to the instrument's resolution (common practice, no source).
bool SettingMatches(double commanded, double held);

class StateReconciler {
 public:
  StateReconciler(LoadDriver& load, SupplyDriver* supply) : load_(load), supply_(supply) {}

  // Empty when the instruments hold what `c` says; else what differs, one
  // clause per difference. `with_guards`: the protections too (periodic
  // checks; output changes read state, mode and level only). Fails only when
  // an instrument that answered a read-back before no longer does.
  Result<std::string> Check(const CommandedState& c, bool with_guards);

  // Read-backs the instruments do not answer ("load mode (no reply ...)"),
  // each once; the caller records and clears them.
  std::vector<std::string> TakeSkipped() { return std::move(skipped_); }

 private:
  enum Item { kInput, kMode, kLevel, kGuardBase, kSupplyOutput = kGuardBase + 4, kSupplyVolts, kSupplyAmps, kItems };
  enum class Known { kUntried, kYes, kNo };
  // Runs `read` for `item` unless skipped; nullopt: skipped (now or before).
  template <typename T, typename F>
  Result<std::optional<T>> Try(Item item, const char* what, F&& read);

  LoadDriver& load_;
  SupplyDriver* supply_;
  Known known_[kItems] = {};
  std::vector<std::string> skipped_;
};

}  // namespace kp
