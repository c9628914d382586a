// The rig built from a rig file: owns transports, sessions and drivers.
#include <algorithm>
#include <iostream>

#include <fmt/format.h>

#include "drivers/scpi_trace.h"
#include "drivers/stream_transport.h"
#include "rig/device_identity.h"
#include "rig/rig_file.h"

namespace kp {
namespace {

class FileRig final : public Rig {
 public:
  ~FileRig() override { Close(); }

  RigRoles roles() override {
    RigRoles r;
    r.load = load_.get();
    r.meter = meter_.get();
    r.thermometer = thermometer_.get();
    r.supply = supply_.get();
    r.chamber = chamber_.get();
    r.description = description_;
    r.thermometer_tolerance_c = thermometer_tolerance_c_;
    r.instruments = instruments_;
    r.rig_text = rig_text_;
    r.bench = bench_;
    return r;
  }
  Clock& clock() override { return *clock_; }
  std::string LockKey() const override { return lock_key_; }
  BenchLimits limits() const override { return limits_; }

  Status Open(const RigFileSpec& spec, const RigOpenOptions& o) {
    description_ = spec.path;
    limits_ = spec.limits;
    rig_text_ = spec.text;
    bench_ = spec.name;
    if (o.clock != nullptr) {
      clock_ = o.clock;
    } else {
      owned_clock_ = std::make_unique<SteadyClock>(spec.clock_speed);
      clock_ = owned_clock_.get();
    }
    auto note = o.note ? o.note : [](std::string_view m) { std::cerr << "kneepoint: " << m << "\n"; };
    note_ = note;
    std::string trace_path = o.trace_path.empty() ? spec.trace : o.trace_path;
    ScpiTraceHook trace;
    if (!trace_path.empty()) {
      KP_ASSIGN_OR_RETURN(trace, OpenTraceFile(trace_path));
    }
    std::vector<std::string> addresses;
    for (const InstrumentSpec& is : spec.instruments) {
      std::string where = fmt::format("{}:{}: instrument '{}'", spec.path, is.line, is.name);
      KP_ASSIGN_OR_RETURN(Address addr, ParseAddress(is.address));
      StreamOptions so;
      so.connect_timeout = Seconds(is.timeout_s);
      so.note = note;
      Result<std::unique_ptr<Transport>> t = OpenTransport(addr, so);
      if (!t.ok()) return t.status().WithContext(where);
      ScpiOptions opts;
      opts.timeout = Seconds(is.timeout_s);
      opts.retries = is.retries;
      opts.confirm_writes = is.confirm_writes;
      opts.late_reply = Seconds(is.late_reply_s >= 0 ? is.late_reply_s : is.timeout_s);
      opts.error_query = is.profile.error_query;
      opts.strip_units = is.profile.strip_units;
      auto session = std::make_unique<ScpiSession>(std::move(*t), *clock_, opts);
      if (trace) session->SetTrace(trace);
      (void)session->Clear();
      Result<std::string> idn = session->Identify();
      if (!idn.ok()) return idn.status().WithContext(where + ": no answer to *IDN?");
      if (!IdentityMatches(is.profile.identity, *idn))
        return InvalidInput(fmt::format("{} answered *IDN? with '{}', but profile '{}' expects '{}'", where, *idn, is.profile_ref,
                                        is.profile.identity));
      if (Status st = session->DrainErrors(); !st.ok()) note(fmt::format("{}: errors queued before the run: {}", is.name, st.message()));
      // From here the dialect's error check applies to every setting; the
      // teardown list is owed from now on, whatever fails next.
      session->SetCheckSettings(is.profile.check_settings);
      Closing closing{session.get(), is.name, is.profile.teardown, nullptr, nullptr};
      for (const std::string& c : is.profile.init)
        if (Status st = session->Write(c); !st.ok()) {
          closings_.push_back(closing);
          sessions_.push_back(std::move(session));
          return st.WithContext(fmt::format("{}: init command '{}'", where, c));
        }
      InstrumentRecord rec;
      rec.name = is.name;
      for (const std::string& role : is.roles) rec.roles += (rec.roles.empty() ? "" : ",") + role;
      rec.address = is.address;
      rec.profile = is.profile_ref;
      rec.identity = *idn;
      SplitIdentity(rec);
      rec.voltage_gain = is.voltage.gain, rec.voltage_offset_v = is.voltage.offset;
      rec.current_gain = is.current.gain, rec.current_offset_a = is.current.offset;
      rec.temperature_gain = is.temperature.gain, rec.temperature_offset_c = is.temperature.offset;
      rec.calibrated_on = is.calibrated_on;
      instruments_.push_back(std::move(rec));
      ScpiSession& s = *session;
      sessions_.push_back(std::move(session));
      closings_.push_back(closing);
      addresses.push_back(DeviceIdentity(addr));  // one key however the address is spelt
      for (const std::string& role : is.roles) {
        if (role == "load") {
          load_ = std::make_unique<LoadDriver>(s, is.profile.load);
          closings_.back().load = load_.get();
          load_->SetCalibration(is.voltage, is.current);
          load_->SetLimits(limits_.max_current_a, limits_.load_rating_w);
          // Inert first: whatever state the load was left in, its input goes off now.
          KP_RETURN_IF_ERROR(load_->SetInput(false).WithContext(where + ": switching the input off"));
          if (is.remote_sense) KP_RETURN_IF_ERROR(load_->SetRemoteSense(true).WithContext(where + ": remote sense"));
          if (limits_.max_current_a > 0 && !is.profile.load.over_current_backstop.empty()) {
            Status st = load_->SetOverCurrentBackstop(limits_.max_current_a);
            if (st.ok()) st = s.DrainErrors();
            if (!st.ok()) note(fmt::format("{}: over-current protection not set: {}", is.name, st.message()));
          }
        } else if (role == "meter") {
          meter_ = std::make_unique<MeterDriver>(s, is.profile.meter);
          meter_->SetCalibration(is.voltage);
          meter_->SetStuckLimit(is.stuck_after);
        } else if (role == "thermometer") {
          thermometer_ = std::make_unique<ThermometerDriver>(s, is.profile.thermometer);
          thermometer_->SetCalibration(is.temperature);
          thermometer_tolerance_c_ = is.temperature_tolerance_c;
        } else if (role == "chamber") {
          chamber_ = std::make_unique<ChamberDriver>(s, is.profile.chamber, ChamberLimits{limits_.chamber_min_c, limits_.chamber_max_c});
        } else if (role == "supply") {
          supply_ = std::make_unique<SupplyDriver>(s, is.profile.supply);
          closings_.back().supply = supply_.get();
          KP_RETURN_IF_ERROR(supply_->SetOutput(false).WithContext(where + ": switching the output off"));
        }
      }
    }
    // The cell must already be inside the rig's voltage rating.
    if (limits_.max_voltage_v > 0) {
      Result<double> v = meter_ ? meter_->MeasureVoltage() : load_->MeasureVoltage();
      if (!v.ok()) return v.status().WithContext(spec.path + ": reading the cell voltage");
      if (*v > limits_.max_voltage_v)
        return LimitExceeded(fmt::format("{}: the cell reads {:.3f} V, above the rig's max_voltage_v {:.3f} V", spec.path, *v,
                                         limits_.max_voltage_v));
    }
    std::sort(addresses.begin(), addresses.end());
    for (const auto& a : addresses) lock_key_ += (lock_key_.empty() ? "" : " ") + a;
    return Status::Ok();
  }

 private:
  // One instrument's way out: its teardown list, between its load input (or
  // supply output) going off and being read back off.
  struct Closing {
    ScpiSession* session = nullptr;
    std::string name;
    std::vector<std::string> teardown;
    LoadDriver* load = nullptr;
    SupplyDriver* supply = nullptr;
  };

  // Runs each instrument's teardown; a load ends with its input off whatever
  // the list said (switched off again when it reads back on).
  void Close() {
    for (Closing& c : closings_) {
      if (c.teardown.empty()) continue;
      if (c.load != nullptr) (void)c.load->SetInput(false);
      if (c.supply != nullptr) (void)c.supply->SetOutput(false);
      for (const std::string& cmd : c.teardown)
        if (Status st = c.session->Write(cmd); !st.ok() && note_) note_(fmt::format("{}: teardown '{}': {}", c.name, cmd, st.message()));
      if (c.load != nullptr) {
        Result<bool> on = c.load->InputState();
        if (!on.ok() || *on) {
          Status st = c.load->SetInput(false);
          if (note_) note_(fmt::format("{}: after the teardown the load input {}; switched off again{}", c.name,
                                       on.ok() ? "read back on" : "could not be read back", st.ok() ? "" : ": " + st.message()));
        }
      }
      if (c.supply != nullptr) {
        Result<bool> on = c.supply->OutputState();
        if (!on.ok() || *on) (void)c.supply->SetOutput(false);
      }
    }
    closings_.clear();
  }

  std::function<void(std::string_view)> note_;
  std::vector<Closing> closings_;
  std::unique_ptr<Clock> owned_clock_;
  Clock* clock_ = nullptr;
  std::vector<std::unique_ptr<ScpiSession>> sessions_;
  std::unique_ptr<LoadDriver> load_;
  std::unique_ptr<MeterDriver> meter_;
  std::unique_ptr<ThermometerDriver> thermometer_;
  double thermometer_tolerance_c_ = 0.5;
  std::unique_ptr<SupplyDriver> supply_;
  std::unique_ptr<ChamberDriver> chamber_;
  std::string description_, lock_key_, rig_text_, bench_;
  std::vector<InstrumentRecord> instruments_;
  BenchLimits limits_;
};

}  // namespace

Result<std::unique_ptr<Rig>> OpenFileRig(const RigFileSpec& spec, const RigOpenOptions& options) {
  auto rig = std::make_unique<FileRig>();
  KP_RETURN_IF_ERROR(rig->Open(spec, options));
  return std::unique_ptr<Rig>(std::move(rig));
}

}  // namespace kp
