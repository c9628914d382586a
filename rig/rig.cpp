#include "rig/rig.h"

#include <fmt/format.h>

#include "rig/rig_file.h"
#include "rig/sim_rig.h"

namespace kp {
namespace {

class BuiltInSimRig final : public Rig {
 public:
  explicit BuiltInSimRig(const RigOpenOptions& o)
      : clock_(o.sim_speed > 0 ? std::unique_ptr<Clock>(new SteadyClock(o.sim_speed)) : std::unique_ptr<Clock>(new VirtualClock())),
        sim_(*clock_, o.sim_cell, o.sim_options) {}
  RigRoles roles() override { return sim_.roles(); }
  Clock& clock() override { return *clock_; }
  std::string LockKey() const override { return "sim"; }

 private:
  std::unique_ptr<Clock> clock_;
  SimRig sim_;
};

}  // namespace

Result<std::unique_ptr<Rig>> OpenRig(const std::string& spec, const RigOpenOptions& options) {
  if (spec == "sim") return std::unique_ptr<Rig>(new BuiltInSimRig(options));
  if (spec.ends_with(".toml")) {
    KP_ASSIGN_OR_RETURN(RigFileSpec file, LoadRigFile(spec));
    return OpenFileRig(file, options);
  }
  return InvalidInput(fmt::format("unknown rig '{}': use 'sim' or a rig file (.toml)", spec));
}

}  // namespace kp
