// ChannelBench: a multi-channel bench opened from a rig file with [[channel]]
// tables (rig/rig_channels.h). Each instrument is one link (drivers/
// channel_link.h) shared by the channels it serves; each channel gets its own
// SCPI sessions over that link (select line or {ch} commands from the
// dialect), its own role drivers and so its own RigRoles, which a
// RunController uses exactly as a one-cell rig's. Owns everything.
//
// Opening checks every instrument's *IDN? once, switches every channel's load
// input and supply output off, and refuses a cell above the rig's
// max_voltage_v. ChannelRig (below) is one channel seen as a Rig, for `run
// --slot` and `resume` of one channel.
#pragma once

#include <functional>
#include <memory>
#include <string>
#include <vector>

#include "drivers/channel_link.h"
#include "rig/rig.h"
#include "rig/rig_file.h"

namespace kp {

struct BenchChannel {
  std::string slot;
  RigRoles roles;                     // points into the bench
  std::vector<std::string> lock_keys;  // one per instrument channel it uses ("tcp:loopback:5025#3")
  std::vector<int> links;             // the shared links it uses (indexes)
};

struct BenchOpenOptions {
  RigOpenOptions rig;  // clock, trace, note
  // Opens an instrument's link (default: its address, drivers/stream_transport.h).
  // Tests and benchmarks hand in-process simulated instruments here.
  std::function<Result<std::unique_ptr<Transport>>(const InstrumentSpec&)> connect;
};

class ChannelBench {
 public:
  ~ChannelBench();
  int size() const { return static_cast<int>(channels_.size()); }
  BenchChannel& channel(int i) { return channels_.at(static_cast<size_t>(i)); }
  // Index of a slot, -1 when the rig has none of that name.
  int Find(const std::string& slot) const;
  Clock& clock() { return *clock_; }
  BenchLimits limits() const { return spec_.limits; }
  const RigFileSpec& spec() const { return spec_; }
  int link_count() const { return static_cast<int>(links_.size()); }
  const SharedLink& link(int i) const { return *links_.at(static_cast<size_t>(i)); }
  // The enclosure sensor and its limit (no sensor: nullptr).
  ThermometerDriver* enclosure() { return enclosure_.get(); }
  double enclosure_max_c() const { return spec_.enclosure.max_c; }
  // Switches one channel's load input and supply output off and reads them
  // back: empty when verified off, else what is still on (or unknown).
  std::string SwitchOff(int i);

 private:
  friend Result<std::unique_ptr<ChannelBench>> OpenChannelBench(const RigFileSpec&, const BenchOpenOptions&);
  struct ChannelDrivers {
    std::vector<std::unique_ptr<ScpiSession>> sessions;
    std::unique_ptr<LoadDriver> load;
    std::unique_ptr<MeterDriver> meter;
    std::unique_ptr<ThermometerDriver> thermometer;
    std::unique_ptr<SupplyDriver> supply;
  };
  Status Open(const BenchOpenOptions& o);
  Result<std::unique_ptr<ScpiSession>> Session(const ChannelBinding& b, const std::string& tag);

  RigFileSpec spec_;
  std::unique_ptr<Clock> owned_clock_;
  Clock* clock_ = nullptr;
  ScpiTraceHook trace_;
  std::vector<std::unique_ptr<SharedLink>> links_;  // by instrument index (null when unused)
  std::vector<std::string> identities_;             // DeviceIdentity per instrument
  std::vector<InstrumentRecord> records_;           // per instrument
  std::vector<ChannelDrivers> drivers_;
  std::vector<BenchChannel> channels_;
  std::unique_ptr<ScpiSession> enclosure_session_;
  std::unique_ptr<ThermometerDriver> enclosure_;
};

Result<std::unique_ptr<ChannelBench>> OpenChannelBench(const RigFileSpec& spec, const BenchOpenOptions& options);

namespace sim {
class SimMultiBench;
}
// A BenchOpenOptions::connect that links every instrument of the rig file to
// the simulated multi-channel bench in process, by the instrument's first role
// (load, meter, thermometer, supply), on `clock`: the demo, tests and
// benchmarks in virtual time. Addresses read "PREFIX + instrument name".
std::function<Result<std::unique_ptr<Transport>>(const InstrumentSpec&)> ConnectToSimBench(sim::SimMultiBench& multi, Clock& clock,
                                                                                            std::string prefix = "inproc:");

// One channel of a bench as a Rig (owns the bench): `run --slot`, `resume`.
// Its locks are its instrument channels (RigLockKeys), so other processes can
// run the other channels of the same instruments.
Result<std::unique_ptr<Rig>> OpenChannelRig(const RigFileSpec& spec, const std::string& slot, const BenchOpenOptions& options);

// OpenRig (rig/rig.h), or for a non-empty `slot` that channel of the
// multi-channel rig file `rig` (OpenChannelRig).
Result<std::unique_ptr<Rig>> OpenRigForSlot(const std::string& rig, const RigOpenOptions& options, const std::string& slot);

// The locks a run on `rig` takes, each on its own (AcquireAll, rig/run_lock.h):
// one per instrument channel for a channel of a multi-channel bench, else
// the rig's one LockKey().
std::vector<std::string> RigLockKeys(const Rig& rig);

}  // namespace kp
