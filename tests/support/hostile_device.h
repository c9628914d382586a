// A simulated instrument that misbehaves on purpose, behind the in-process
// transport: acknowledges commands it then ignores, answers twice, answers
// late, sends bytes that are not UTF-8 or terminal escapes. Tests of the
// session's framing and the run's reconciliation use it.
#pragma once

#include <functional>
#include <optional>
#include <string>
#include <string_view>

#include "drivers/inproc_transport.h"
#include "drivers/sim/sim_bench.h"
#include "drivers/transport.h"
#include "rig/run_controller.h"
#include "tests/support/fixtures.h"

namespace kp::testing {

class HostileDevice final : public LineDevice {
 public:
  explicit HostileDevice(LineDevice& inner) : inner_(inner) {}
  std::optional<std::string> HandleLine(std::string_view line) override;

  // Lines for which this returns true are acknowledged but never reach the
  // instrument (a load that ignores INP OFF).
  std::function<bool(std::string_view)> ignore;
  // Queries (lines with '?') counted from 1: the N-th is answered twice ...
  int twice_at = -1;
  bool twice_always = false;
  // ... the N-th is not answered at once; its reply comes in front of the
  // reply to the next line (a late reply).
  int late_at = -1;
  // Replies to queries matching this are replaced by `reply_text`.
  std::function<bool(std::string_view)> replace_when;
  std::string reply_text;

  int queries = 0;

 private:
  LineDevice& inner_;
  std::string late_;
};

// The simulated bench with its load and meter behind HostileDevices (which
// pass everything through until told otherwise), a store and a virtual clock.
struct HostileRig {
  StoreFixture f;
  sim::SimBench bench{sim::DemoLiIonCell(2.56), f.clock};
  HostileDevice load_dev{bench.load()};
  HostileDevice meter_dev{bench.meter()};
  ScpiSession load_s{std::make_unique<InProcTransport>(load_dev, f.clock, "inproc:hostile-load"), f.clock};
  ScpiSession meter_s{std::make_unique<InProcTransport>(meter_dev, f.clock, "inproc:hostile-meter"), f.clock};
  ScpiSession thermo_s{std::make_unique<InProcTransport>(bench.thermometer(), f.clock, "inproc:sim-temp"), f.clock};
  LoadDriver load{load_s};
  MeterDriver meter{meter_s};
  ThermometerDriver thermo{thermo_s};

  RunResult Run(const Plan& plan, RunOptions o = {});
  bool HasEvent(int64_t run, const std::string& kind, const std::string& text);
  // Another program talking to the same load.
  void SecondClient(const std::string& line) { (void)bench.load().HandleLine(line); }
};

}  // namespace kp::testing
