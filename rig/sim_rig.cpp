#include "rig/sim_rig.h"

#include "drivers/inproc_transport.h"

namespace kp {

SimRig::SimRig(Clock& clock, sim::CellParams cell, sim::SimOptions options) : bench_(std::move(cell), clock, options) {
  load_session_ = std::make_unique<ScpiSession>(std::make_unique<InProcTransport>(bench_.load(), clock, "inproc:sim-load"), clock);
  meter_session_ = std::make_unique<ScpiSession>(std::make_unique<InProcTransport>(bench_.meter(), clock, "inproc:sim-meter"), clock);
  thermo_session_ = std::make_unique<ScpiSession>(std::make_unique<InProcTransport>(bench_.thermometer(), clock, "inproc:sim-temp"), clock);
  load_ = std::make_unique<LoadDriver>(*load_session_);
  meter_ = std::make_unique<MeterDriver>(*meter_session_);
  thermometer_ = std::make_unique<ThermometerDriver>(*thermo_session_);
  supply_session_ = std::make_unique<ScpiSession>(std::make_unique<InProcTransport>(bench_.supply(), clock, "inproc:sim-supply"), clock);
  supply_ = std::make_unique<SupplyDriver>(*supply_session_);
}

RigRoles SimRig::roles() { RigRoles r;
  r.load = load_.get();
  r.meter = meter_.get();
  r.thermometer = thermometer_.get();
  r.supply = supply_.get();
  r.description = "sim";
  return r; }

void SimRig::SetTrace(const ScpiTraceHook& hook) {
  for (ScpiSession* s : {load_session_.get(), meter_session_.get(), thermo_session_.get(), supply_session_.get()})
    if (s != nullptr) s->SetTrace(hook);
}

}  // namespace kp
