#include "rig/rig.h"

#include <fmt/format.h>
#include <unistd.h>

#include "drivers/scpi_trace.h"
#include "rig/rig_file.h"
#include "rig/sim_rig.h"

namespace kp {
namespace {

class BuiltInSimRig final : public Rig {
 public:
  explicit BuiltInSimRig(const RigOpenOptions& o)
      : clock_(o.sim_speed > 0 ? std::unique_ptr<Clock>(new SteadyClock(o.sim_speed)) : std::unique_ptr<Clock>(new VirtualClock())),
        sim_(*clock_, o.sim_cell, o.sim_options) {
    limits_.max_current_a = o.sim_options.load_max_current_a;
  }
  RigRoles roles() override { return sim_.roles(); }
  BenchLimits limits() const override { return limits_; }
  SimRig& sim() { return sim_; }
  Clock& clock() override { return *clock_; }
  // Each process simulates its own bench: nothing to share, so the key is
  // this process's own and never refuses another runner.
  std::string LockKey() const override { return fmt::format("sim-process-{}", static_cast<long>(getpid())); }

 private:
  std::unique_ptr<Clock> clock_;
  SimRig sim_;
  BenchLimits limits_;
};

}  // namespace

Result<std::unique_ptr<Rig>> OpenRig(const std::string& spec, const RigOpenOptions& options) {
  if (spec == "sim") {
    auto rig = std::make_unique<BuiltInSimRig>(options);
    if (!options.trace_path.empty()) {
      KP_ASSIGN_OR_RETURN(ScpiTraceHook trace, OpenTraceFile(options.trace_path));
      rig->sim().SetTrace(trace);
    }
    return std::unique_ptr<Rig>(std::move(rig));
  }
  if (spec.ends_with(".toml")) {
    KP_ASSIGN_OR_RETURN(RigFileSpec file, LoadRigFile(spec));
    if (!file.channels.empty()) {
      std::string slots;
      for (const ChannelSpec& c : file.channels) slots += (slots.empty() ? "" : ", ") + c.slot;
      return InvalidInput(fmt::format("{} is a multi-channel bench (slots {}): choose the channel with --slot, or several with --slots",
                                      spec, slots));
    }
    return OpenFileRig(file, options);
  }
  return InvalidInput(fmt::format("unknown rig '{}': use 'sim' or a rig file (.toml)", spec));
}

RigLimits PlanLimitsFor(Rig& rig) {
  RigLimits out;
  BenchLimits b = rig.limits();
  if (b.max_current_a > 0) out.max_current_a = b.max_current_a;
  if (b.max_voltage_v > 0) out.max_voltage_v = b.max_voltage_v;
  if (b.load_rating_w > 0) out.max_power_w = b.load_rating_w;
  RigRoles roles = rig.roles();
  out.has_supply = roles.supply != nullptr;
  out.has_chamber = roles.chamber != nullptr;
  if (roles.chamber != nullptr) {
    out.chamber_min_c = roles.chamber->limits().min_c;
    out.chamber_max_c = roles.chamber->limits().max_c;
  }
  return out;
}

}  // namespace kp
