#include "rig/channel_bench.h"

#include <algorithm>
#include <iostream>

#include <fmt/format.h>

#include "drivers/address.h"
#include "drivers/inproc_transport.h"
#include "drivers/sim/multi_bench.h"
#include "drivers/scpi_trace.h"
#include "drivers/stream_transport.h"
#include "rig/device_identity.h"
#include "rig/rig_channels.h"

namespace kp {

ChannelBench::~ChannelBench() = default;

int ChannelBench::Find(const std::string& slot) const {
  for (size_t i = 0; i < channels_.size(); ++i)
    if (channels_[i].slot == slot) return static_cast<int>(i);
  return -1;
}

Result<std::unique_ptr<ScpiSession>> ChannelBench::Session(const ChannelBinding& b, const std::string& tag) {
  const InstrumentSpec& is = spec_.instruments.at(static_cast<size_t>(b.instrument));
  InstrumentProfile p = BoundProfile(spec_, b);
  ScpiOptions opts;
  opts.timeout = Seconds(is.timeout_s);
  opts.retries = is.retries;
  opts.confirm_writes = is.confirm_writes;
  opts.late_reply = Seconds(is.late_reply_s >= 0 ? is.late_reply_s : is.timeout_s);
  auto session = std::make_unique<ScpiSession>(links_.at(static_cast<size_t>(b.instrument))->Channel(tag, p.channel_select), *clock_, opts);
  if (trace_) session->SetTrace(trace_);
  return session;
}

Status ChannelBench::Open(const BenchOpenOptions& o) {
  if (o.rig.clock != nullptr) {
    clock_ = o.rig.clock;
  } else {
    owned_clock_ = std::make_unique<SteadyClock>(spec_.clock_speed);
    clock_ = owned_clock_.get();
  }
  auto note = o.rig.note ? o.rig.note : [](std::string_view m) { std::cerr << "kneepoint: " << m << "\n"; };
  std::string trace_path = o.rig.trace_path.empty() ? spec_.trace : o.rig.trace_path;
  if (!trace_path.empty()) {
    KP_ASSIGN_OR_RETURN(trace_, OpenTraceFile(trace_path));
  }
  // Links: one per instrument any channel (or the enclosure) uses.
  std::vector<bool> used(spec_.instruments.size(), false);
  for (const ChannelSpec& c : spec_.channels)
    for (const ChannelBinding* b : {&c.load, &c.sense, &c.temperature, &c.supply})
      if (b->bound()) used[static_cast<size_t>(b->instrument)] = true;
  if (spec_.enclosure.sensor.bound()) used[static_cast<size_t>(spec_.enclosure.sensor.instrument)] = true;
  links_.resize(spec_.instruments.size());
  identities_.resize(spec_.instruments.size());
  records_.resize(spec_.instruments.size());
  for (size_t i = 0; i < spec_.instruments.size(); ++i) {
    if (!used[i]) continue;
    const InstrumentSpec& is = spec_.instruments[i];
    std::string where = fmt::format("{}:{}: instrument '{}'", spec_.path, is.line, is.name);
    KP_ASSIGN_OR_RETURN(Address addr, ParseAddress(is.address));
    identities_[i] = DeviceIdentity(addr);
    Result<std::unique_ptr<Transport>> t = [&]() -> Result<std::unique_ptr<Transport>> {
      if (o.connect) return o.connect(is);
      StreamOptions so;
      so.connect_timeout = Seconds(is.timeout_s);
      so.note = note;
      return OpenTransport(addr, so);
    }();
    if (!t.ok()) return t.status().WithContext(where);
    links_[i] = std::make_unique<SharedLink>(std::move(*t), *clock_);
    ScpiOptions opts;
    opts.timeout = Seconds(is.timeout_s);
    opts.retries = is.retries;
    ScpiSession s(links_[i]->Channel("", ""), *clock_, opts);
    if (trace_) s.SetTrace(trace_);
    (void)s.Clear();
    Result<std::string> idn = s.Identify();
    if (!idn.ok()) return idn.status().WithContext(where + ": no answer to *IDN?");
    if (!IdentityMatches(is.profile.identity, *idn))
      return InvalidInput(fmt::format("{} answered *IDN? with '{}', but profile '{}' expects '{}'", where, *idn, is.profile_ref,
                                      is.profile.identity));
    if (Status st = s.DrainErrors(); !st.ok()) note(fmt::format("{}: errors queued before the run: {}", is.name, st.message()));
    InstrumentRecord& rec = records_[i];
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
  }
  // Channels: their own sessions and drivers over the shared links.
  drivers_.resize(spec_.channels.size());
  for (size_t ci = 0; ci < spec_.channels.size(); ++ci) {
    const ChannelSpec& c = spec_.channels[ci];
    ChannelDrivers& d = drivers_[ci];
    BenchChannel bc;
    bc.slot = c.slot;
    std::string where = fmt::format("{}:{}: channel '{}'", spec_.path, c.line, c.slot);
    auto bind = [&](const ChannelBinding& b, const char* role) -> Result<ScpiSession*> {
      const InstrumentSpec& is = spec_.instruments.at(static_cast<size_t>(b.instrument));
      KP_ASSIGN_OR_RETURN(std::unique_ptr<ScpiSession> s, Session(b, b.channel.empty() ? std::string() : "ch " + b.channel));
      d.sessions.push_back(std::move(s));
      ScpiSession* raw = d.sessions.back().get();  // owned by the channel's drivers
      std::string key = identities_[static_cast<size_t>(b.instrument)] + (b.channel.empty() ? "" : "#" + b.channel);
      if (std::find(bc.lock_keys.begin(), bc.lock_keys.end(), key) == bc.lock_keys.end()) bc.lock_keys.push_back(key);
      if (std::find(bc.links.begin(), bc.links.end(), b.instrument) == bc.links.end()) bc.links.push_back(b.instrument);
      InstrumentRecord rec = records_[static_cast<size_t>(b.instrument)];
      rec.name = BindingText(spec_, b);
      rec.roles = role;
      bc.roles.instruments.push_back(std::move(rec));
      (void)is;
      return raw;
    };
    const InstrumentSpec& load_is = spec_.instruments.at(static_cast<size_t>(c.load.instrument));
    KP_ASSIGN_OR_RETURN(ScpiSession * ls, bind(c.load, "load"));
    d.load = std::make_unique<LoadDriver>(*ls, BoundProfile(spec_, c.load).load);
    d.load->SetCalibration(load_is.voltage, load_is.current);
    d.load->SetLimits(spec_.limits.max_current_a, spec_.limits.load_rating_w);
    KP_RETURN_IF_ERROR(d.load->SetInput(false).WithContext(where + ": switching the load input off"));
    if (load_is.remote_sense) KP_RETURN_IF_ERROR(d.load->SetRemoteSense(true).WithContext(where + ": remote sense"));
    if (spec_.limits.max_current_a > 0 && d.load->HasGuard(LoadGuard::kOverCurrent)) {
      Status st = d.load->SetOverCurrentBackstop(spec_.limits.max_current_a);
      if (st.ok()) st = ls->DrainErrors();
      if (!st.ok()) note(fmt::format("{}: over-current protection not set: {}", where, st.message()));
    }
    if (c.sense.bound()) {
      const InstrumentSpec& is = spec_.instruments.at(static_cast<size_t>(c.sense.instrument));
      KP_ASSIGN_OR_RETURN(ScpiSession * s, bind(c.sense, "meter"));
      d.meter = std::make_unique<MeterDriver>(*s, BoundProfile(spec_, c.sense).meter);
      d.meter->SetCalibration(is.voltage);
      d.meter->SetStuckLimit(is.stuck_after);
    }
    {
      const InstrumentSpec& is = spec_.instruments.at(static_cast<size_t>(c.temperature.instrument));
      KP_ASSIGN_OR_RETURN(ScpiSession * s, bind(c.temperature, "thermometer"));
      d.thermometer = std::make_unique<ThermometerDriver>(*s, BoundProfile(spec_, c.temperature).thermometer);
      d.thermometer->SetCalibration(is.temperature);
      bc.roles.thermometer_tolerance_c = is.temperature_tolerance_c;
    }
    if (c.supply.bound()) {
      KP_ASSIGN_OR_RETURN(ScpiSession * s, bind(c.supply, "supply"));
      d.supply = std::make_unique<SupplyDriver>(*s, BoundProfile(spec_, c.supply).supply);
      KP_RETURN_IF_ERROR(d.supply->SetOutput(false).WithContext(where + ": switching the supply output off"));
    }
    if (spec_.limits.max_voltage_v > 0) {
      Result<double> v = d.meter ? d.meter->MeasureVoltage() : d.load->MeasureVoltage();
      if (!v.ok()) return v.status().WithContext(where + ": reading the cell voltage");
      if (*v > spec_.limits.max_voltage_v)
        return LimitExceeded(fmt::format("{}: the cell reads {:.3f} V, above the rig's max_voltage_v {:.3f} V", where, *v,
                                         spec_.limits.max_voltage_v));
    }
    bc.roles.load = d.load.get();
    bc.roles.meter = d.meter.get();
    bc.roles.thermometer = d.thermometer.get();
    bc.roles.supply = d.supply.get();
    bc.roles.description = fmt::format("{} slot {}", spec_.path, c.slot);
    bc.roles.rig_text = spec_.text;
    bc.roles.bench = spec_.name;
    channels_.push_back(std::move(bc));
  }
  if (spec_.enclosure.sensor.bound()) {
    const ChannelBinding& b = spec_.enclosure.sensor;
    const InstrumentSpec& is = spec_.instruments.at(static_cast<size_t>(b.instrument));
    KP_ASSIGN_OR_RETURN(enclosure_session_, Session(b, "enclosure"));
    enclosure_ = std::make_unique<ThermometerDriver>(*enclosure_session_, BoundProfile(spec_, b).thermometer);
    enclosure_->SetCalibration(is.temperature);
  }
  return Status::Ok();
}

std::string ChannelBench::SwitchOff(int i) {
  ChannelDrivers& d = drivers_.at(static_cast<size_t>(i));
  std::string still;
  Status st = d.load->SetInput(false);
  Result<bool> on = d.load->InputState();
  if (!st.ok() && (!on.ok() || *on)) still = "load input (" + st.message() + ")";
  else if (on.ok() && *on) still = "load input";
  if (d.supply) {
    Status ss = d.supply->SetOutput(false);
    Result<bool> out = d.supply->OutputState();
    if ((!ss.ok() && (!out.ok() || *out)) || (out.ok() && *out)) still += std::string(still.empty() ? "" : ", ") + "supply output";
  }
  return still;
}

std::function<Result<std::unique_ptr<Transport>>(const InstrumentSpec&)> ConnectToSimBench(sim::SimMultiBench& multi, Clock& clock,
                                                                                            std::string prefix) {
  return [&multi, &clock, prefix = std::move(prefix)](const InstrumentSpec& is) -> Result<std::unique_ptr<Transport>> {
    const std::string role = is.roles.empty() ? std::string() : is.roles.front();
    LineDevice* d = role == "load"          ? &multi.load()
                    : role == "meter"       ? &multi.meter()
                    : role == "thermometer" ? &multi.thermometer()
                    : role == "supply"      ? &multi.supply()
                                            : nullptr;
    if (d == nullptr)
      return InvalidInput(fmt::format("instrument '{}': the simulated bench has no '{}' (load, meter, thermometer, supply)", is.name, role));
    return std::unique_ptr<Transport>(std::make_unique<InProcTransport>(*d, clock, prefix + is.name));
  };
}

Result<std::unique_ptr<ChannelBench>> OpenChannelBench(const RigFileSpec& spec, const BenchOpenOptions& options) {
  if (spec.channels.empty()) return InvalidInput(spec.path + ": the rig file declares no [[channel]] tables");
  std::unique_ptr<ChannelBench> bench(new ChannelBench());
  bench->spec_ = spec;
  KP_RETURN_IF_ERROR(bench->Open(options));
  return bench;
}

namespace {

class ChannelRig final : public Rig {
 public:
  ChannelRig(std::unique_ptr<ChannelBench> bench, int index) : bench_(std::move(bench)), index_(index) {}
  RigRoles roles() override { return bench_->channel(index_).roles; }
  Clock& clock() override { return bench_->clock(); }
  std::string LockKey() const override {
    std::vector<std::string> keys = bench_->channel(index_).lock_keys;
    std::sort(keys.begin(), keys.end());
    std::string out;
    for (const auto& k : keys) out += (out.empty() ? "" : " ") + k;
    return out;
  }
  std::vector<std::string> LockKeys() const { return bench_->channel(index_).lock_keys; }
  BenchLimits limits() const override { return bench_->limits(); }

 private:
  std::unique_ptr<ChannelBench> bench_;
  int index_;
};

}  // namespace

Result<std::unique_ptr<Rig>> OpenChannelRig(const RigFileSpec& spec, const std::string& slot, const BenchOpenOptions& options) {
  RigFileSpec one = spec;
  auto it = std::find_if(one.channels.begin(), one.channels.end(), [&](const ChannelSpec& c) { return c.slot == slot; });
  if (it == one.channels.end()) {
    std::string slots;
    for (const ChannelSpec& c : spec.channels) slots += (slots.empty() ? "" : ", ") + c.slot;
    return InvalidInput(fmt::format("{}: no slot '{}' (slots: {})", spec.path, slot, slots));
  }
  ChannelSpec keep = *it;
  one.channels = {keep};  // only this channel's instruments are opened and switched
  KP_ASSIGN_OR_RETURN(std::unique_ptr<ChannelBench> bench, OpenChannelBench(one, options));
  return std::unique_ptr<Rig>(new ChannelRig(std::move(bench), 0));
}

Result<std::unique_ptr<Rig>> OpenRigForSlot(const std::string& rig, const RigOpenOptions& options, const std::string& slot) {
  if (slot.empty()) return OpenRig(rig, options);
  if (!rig.ends_with(".toml")) return InvalidInput(fmt::format("--slot needs a multi-channel rig file (.toml), not '{}'", rig));
  KP_ASSIGN_OR_RETURN(RigFileSpec spec, LoadRigFile(rig));
  if (spec.channels.empty()) return InvalidInput(fmt::format("--slot: {} declares no [[channel]] tables", rig));
  BenchOpenOptions bo;
  bo.rig = options;
  return OpenChannelRig(spec, slot, bo);
}

std::vector<std::string> RigLockKeys(const Rig& rig) {
  if (const auto* channel = dynamic_cast<const ChannelRig*>(&rig)) return channel->LockKeys();
  return {rig.LockKey()};
}

}  // namespace kp
