#include "rig/bench_run.h"

#include <fmt/format.h>

#include <memory>
#include <mutex>
#include <set>
#include <thread>

#include "drivers/lockstep_clock.h"
#include "rig/control_channel.h"
#include "rig/run_lock.h"
#include "rig/store.h"

namespace kp {
namespace {

// One channel's stop: the first reason wins, written before the flag is set
// (the run loop reads the reason only after it saw the flag).
struct ChannelStop {
  std::atomic<bool> flag{false};
  std::atomic<bool> claimed{false};
  std::string fault;  // bench-level fault text (empty: none)
};

}  // namespace

Result<std::vector<ChannelOutcome>> RunBench(ChannelBench& bench, std::vector<ChannelJob> jobs, const BenchRunOptions& opt) {
  if (jobs.empty()) return InvalidInput("no channel to run");
  std::set<int> seen;
  for (const ChannelJob& j : jobs) {
    if (j.channel < 0 || j.channel >= bench.size() || j.plan == nullptr) return InvalidInput("a bench job names no channel or plan");
    if (!seen.insert(j.channel).second)
      return InvalidInput(fmt::format("slot '{}' is given two runs at once", bench.channel(j.channel).slot));
  }
  // Locks first: nothing is switched on before every channel is ours.
  std::vector<std::unique_ptr<RunLock>> locks;
  if (opt.take_locks) {
    std::vector<std::string> keys;
    for (const ChannelJob& j : jobs)
      for (const std::string& k : bench.channel(j.channel).lock_keys) keys.push_back(k);
    auto taken = AcquireAll(keys, opt.holder.empty() ? std::string("a bench run") : opt.holder,
                            opt.lock_dir.empty() ? RunLock::DefaultDir() : opt.lock_dir);
    if (!taken.ok()) return taken.status();
    locks = std::move(*taken);
  }
  SteadyClock steady;
  Clock& wall = opt.wall != nullptr ? *opt.wall : static_cast<Clock&>(steady);
  // One store connection per channel, opened here in turn (a new database is
  // created and migrated once, not by eight threads at once).
  std::vector<std::unique_ptr<Store>> stores;
  for (size_t i = 0; i < jobs.size(); ++i) {
    KP_ASSIGN_OR_RETURN(std::unique_ptr<Store> s, Store::Open(opt.db_path, wall));
    stores.push_back(std::move(s));
  }

  const size_t n = jobs.size();
  std::vector<std::unique_ptr<ChannelStop>> stops;
  for (size_t i = 0; i < n; ++i) stops.push_back(std::make_unique<ChannelStop>());
  std::vector<ChannelOutcome> out(n);
  std::mutex fault_mu;  // bench-level decisions
  auto stop_job = [&](size_t i, const std::string& reason, bool bench_fault) {
    ChannelStop& s = *stops[i];
    if (s.claimed.exchange(true)) return;
    jobs[i].options.stop_reason = reason;
    if (bench_fault) s.fault = reason;
    s.flag.store(true);
  };
  auto stop_all = [&](const std::string& reason, bool bench_fault) {
    std::lock_guard<std::mutex> lk(fault_mu);
    for (size_t i = 0; i < n; ++i) stop_job(i, reason, bench_fault);
  };
  // The enclosure: read by whichever channel is due (its session serialises).
  std::mutex enclosure_mu;
  double next_enclosure_t = 0.0;
  auto check_enclosure = [&](double t_s) {
    ThermometerDriver* enc = bench.enclosure();
    if (enc == nullptr) return;
    std::unique_lock<std::mutex> lk(enclosure_mu, std::try_to_lock);
    if (!lk.owns_lock() || t_s < next_enclosure_t) return;
    next_enclosure_t = t_s + opt.enclosure_period_s;
    Result<double> c = enc->MeasureTemperature();
    if (!c.ok())
      stop_all("bench fault: the enclosure temperature cannot be read (" + c.status().message() + "); every channel switched off", true);
    else if (*c > bench.enclosure_max_c())
      stop_all(fmt::format("bench fault: enclosure at {:.1f} °C, above its limit {:.1f} °C; every channel switched off", *c,
                           bench.enclosure_max_c()),
               true);
  };

  auto* lockstep = dynamic_cast<LockstepClock*>(&bench.clock());
  if (lockstep != nullptr) lockstep->AddParticipants(static_cast<int>(n));
  std::vector<std::thread> threads;
  for (size_t i = 0; i < n; ++i) {
    threads.emplace_back([&, i] {
      LockstepClock::ParticipantScope leave(lockstep);
      ChannelJob& job = jobs[i];
      BenchChannel& ch = bench.channel(job.channel);
      out[i].slot = ch.slot;
      try {
        std::unique_ptr<ControlChannel> control;
        if (opt.control) control = std::make_unique<ControlChannel>(*stores[i], wall);
        RunOptions& ro = job.options;
        ro.stop = &stops[i]->flag;
        ro.control = control.get();
        ro.on_sample = [&, i](const Reading& r, double mah) {
          if (opt.stop != nullptr && opt.stop->load()) stop_all(opt.stop_reason, false);
          check_enclosure(r.t_s);
          if (opt.on_sample) opt.on_sample(static_cast<int>(i), r, mah);
        };
        RunController controller(*stores[i], bench.clock(), ch.roles);
        Result<RunResult> r = controller.Execute(*job.plan, ro);
        if (!r.ok()) {
          out[i].status = r.status();
        } else {
          out[i].result = *r;
          // A link fault on an instrument other channels share is theirs too.
          if (r->outcome == Outcome::kAborted && !stops[i]->flag.load()) {
            for (int l : ch.links) {
              if (!bench.link(l).failing()) continue;
              std::lock_guard<std::mutex> lk(fault_mu);
              for (size_t k = 0; k < n; ++k) {
                const auto& other = bench.channel(jobs[k].channel).links;
                if (k != i && std::find(other.begin(), other.end(), l) != other.end())
                  stop_job(k,
                           fmt::format("bench fault: instrument {} serving several channels was lost (slot {}: {}); its channels switched off",
                                       bench.link(l).Address(), ch.slot, r->reason),
                           true);
              }
            }
          }
        }
      } catch (const std::exception& e) {
        out[i].status = InternalError(fmt::format("slot {}: {}", ch.slot, e.what()));
      } catch (...) {
        out[i].status = InternalError(fmt::format("slot {}: unknown exception", ch.slot));
      }
      out[i].fault = stops[i]->fault;
    });
  }
  for (std::thread& t : threads) t.join();
  // Every channel off, whatever happened above, verified by reading back.
  for (size_t i = 0; i < n; ++i) out[i].left_on = bench.SwitchOff(jobs[i].channel);
  return out;
}

}  // namespace kp
