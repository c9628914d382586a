// Fault campaign: seeded abnormal ends of `kneepoint run` against the
// simulator served over TCP and pseudo-terminals, with the guardian watching.
// Not part of `make test` (it runs for minutes): `make fault-campaign`, or
//
//   build/tests/campaign/kp_fault_campaign [--trials N] [--seed S] [--budget-s S] [--speed K]
//
// Each trial starts a fresh simulated bench (load, meter, thermometer, supply)
// on TCP or ptys, runs a 1 A discharge in a child process (the CLI in this
// program, as `kneepoint run` would), and ends it abnormally at a random
// moment: SIGKILL, an injected SIGSEGV, SIGHUP, SIGPIPE (stdout closed and
// the signal sent: the run must go on) followed by SIGKILL, a hang (SIGSTOP,
// the guardian's hang limit at 2 s), link faults (drops, corruption, delays,
// a disconnect, error replies, frozen readings) and hostile meter replies
// (garbage, an endless line, 9.9E37, NaN, silence) — these the runner ends by
// itself, or a SIGKILL does when it coped —, a database locked by another
// process across the kill, and a full disk (a small tmpfs, when this user may
// mount one; skipped with a message otherwise).
//
// After each: the simulated load input and supply output read off (load
// asked by `INP?` over TCP; on a pty, whose one line the guardian may still be
// using, the simulator's own state is read), how long after the runner's death
// that was, the run's outcome and reason, `PRAGMA integrity_check`, the run
// time between the last reading the load answered and the last committed
// sample (samples lost), and whether `resume` continues an interrupted run.
// The figures are printed at the end; the exit status is 1 when a target is
// missed (load off within 2 s of every death, no corrupt database, no more
// than one commit window lost, every fault ended with the load off and a
// stored reason, no trial past its bound).
#include <fcntl.h>
#include <signal.h>
#include <sqlite3.h>
#include <sys/mount.h>
#include <sys/wait.h>
#include <unistd.h>

#include <algorithm>
#include <atomic>
#include <cerrno>
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <map>
#include <memory>
#include <mutex>
#include <optional>
#include <random>
#include <string>
#include <thread>
#include <vector>

#include <fmt/format.h>

#include "drivers/address.h"
#include "drivers/clock.h"
#include "drivers/scpi_session.h"
#include "drivers/sim/sim_bench.h"
#include "drivers/sim/sim_server.h"
#include "drivers/stream_transport.h"
#include "rig/store.h"
#include "ui/cli/cli.h"

namespace kp {
namespace {

using Clk = std::chrono::steady_clock;
// kill(2) under a name that does not read like the Kill enum.
int SendSignal(pid_t pid, int sig) { return ::kill(pid, sig); }
// Whether a child has ended, leaving it waitable.
bool Ended(pid_t pid) {
  siginfo_t info{};
  return waitid(P_PID, static_cast<id_t>(pid), &info, WEXITED | WNOHANG | WNOWAIT) == 0 && info.si_pid == pid;
}
double Since(Clk::time_point t0) { return std::chrono::duration<double>(Clk::now() - t0).count(); }

enum class Kill { kSigkill, kSegv, kSighup, kSigpipe, kHang, kLinkFault, kHostile, kFullDisk };
const char* KillName(Kill k) {
  switch (k) {
    case Kill::kSigkill: return "SIGKILL";
    case Kill::kSegv: return "SIGSEGV";
    case Kill::kSighup: return "SIGHUP";
    case Kill::kSigpipe: return "SIGPIPE";
    case Kill::kHang: return "hang";
    case Kill::kLinkFault: return "link fault";
    case Kill::kHostile: return "hostile reply";
    case Kill::kFullDisk: return "full disk";
  }
  return "?";
}

enum class Hostility { kNone, kGarbage, kEndless, kOverflow, kNan, kSilent };
const char* HostilityName(Hostility h) {
  switch (h) {
    case Hostility::kNone: return "";
    case Hostility::kGarbage: return "garbage";
    case Hostility::kEndless: return "endless line";
    case Hostility::kOverflow: return "9.9E37";
    case Hostility::kNan: return "NaN";
    case Hostility::kSilent: return "silence";
  }
  return "?";
}

// The meter turned hostile from its N-th query on.
class HostileMeter final : public LineDevice {
 public:
  HostileMeter(LineDevice& inner, Hostility h, int from) : inner_(inner), h_(h), from_(from) {}
  std::optional<std::string> HandleLine(std::string_view line) override {
    std::optional<std::string> r = inner_.HandleLine(line);
    if (h_ == Hostility::kNone || line.find('?') == std::string_view::npos || ++queries_ < from_) return r;
    switch (h_) {
      case Hostility::kGarbage: return std::string("\x15#@!~\x7f garbage \x01");
      case Hostility::kEndless: return std::string(200000, '7');  // one line far past any reply length
      case Hostility::kOverflow: return std::string("9.9E37");
      case Hostility::kNan: return std::string("NaN");
      case Hostility::kSilent: return std::nullopt;
      case Hostility::kNone: break;
    }
    return r;
  }

 private:
  LineDevice& inner_;
  Hostility h_;
  int from_;
  std::atomic<int> queries_{0};
};

// Remembers the simulated time of the load's first and latest current
// reading (one per sample the runner takes).
class ReadingClock final : public LineDevice {
 public:
  ReadingClock(LineDevice& inner, Clock& clock) : inner_(inner), clock_(clock) {}
  std::optional<std::string> HandleLine(std::string_view line) override {
    std::optional<std::string> r = inner_.HandleLine(line);
    if (r && line.rfind("MEAS:CURR?", 0) == 0 && !stopped_.load()) {
      std::lock_guard<std::mutex> lock(mu_);
      double t = clock_.Now().count();
      if (first_ < 0) first_ = t;
      last_ = t;
    }
    return r;
  }
  // Readings after this (the guardian's, resume's) are not the dead runner's.
  void Freeze() { stopped_.store(true); }
  std::pair<double, double> Span() {
    std::lock_guard<std::mutex> lock(mu_);
    return {first_, last_};
  }

 private:
  LineDevice& inner_;
  Clock& clock_;
  std::mutex mu_;
  double first_ = -1, last_ = -1;
  std::atomic<bool> stopped_{false};
};

// A run on a faulty link ends (or has coped) within this many wall seconds of
// its start: the fault starts by the 55th meter query (under 3 s), a silent
// link is waited for 30 s of run time (1.5 s at 20x) with 0.5 s timeouts and
// 2 retries per reading.
constexpr double kFaultBoundS = 10.0;
// Once its disk is full a runner fails its next commit (at most a second later).
constexpr double kFullDiskBoundS = 5.0;

struct Config {
  int trials = 150;
  uint64_t seed = 1;
  double budget_s = 540.0;
  double speed = 20.0;
  std::string only;  // one kind of trial (its KillName), for reproducing one
};

struct TrialResult {
  int index = 0;
  Kill kill = Kill::kSigkill;
  std::string link;  // "tcp" / "pty"
  std::string fault;
  bool locked_db = false;
  bool full_disk = false;
  bool died_abnormally = false;  // the runner process ended by a signal
  double off_after_s = -1;       // load and supply read off, seconds after the runner's end
  std::string outcome, reason;
  bool integrity_ok = false;
  double lost_run_s = -1;        // run seconds between the last reading and the last committed sample
  double lost_wall_s = -1;
  std::string resumed = "-";     // "yes", "no", "-" (not tried: not interrupted, or the disk is full by design)
  double runner_s = 0;           // how long the runner lived
  bool past_bound = false;
  std::string note;
};

std::string Pragma(const std::string& db) {
  sqlite3* h = nullptr;
  if (sqlite3_open_v2(db.c_str(), &h, SQLITE_OPEN_READONLY, nullptr) != SQLITE_OK) {
    sqlite3_close(h);
    return "cannot open";
  }
  sqlite3_busy_timeout(h, 10000);
  sqlite3_stmt* st = nullptr;
  std::string out;
  if (sqlite3_prepare_v2(h, "PRAGMA integrity_check", -1, &st, nullptr) == SQLITE_OK) {
    while (sqlite3_step(st) == SQLITE_ROW) out += reinterpret_cast<const char*>(sqlite3_column_text(st, 0));
  } else {
    out = sqlite3_errmsg(h);
  }
  sqlite3_finalize(st);
  sqlite3_close(h);
  return out;
}

// Holds an exclusive lock on a database from another connection (as a
// second program would), released after `hold_s`.
class DbLocker {
 public:
  DbLocker(const std::string& db, double hold_s) {
    thread_ = std::thread([db, hold_s, this] {
      sqlite3* h = nullptr;
      if (sqlite3_open_v2(db.c_str(), &h, SQLITE_OPEN_READWRITE, nullptr) == SQLITE_OK) {
        sqlite3_busy_timeout(h, 5000);
        if (sqlite3_exec(h, "BEGIN EXCLUSIVE", nullptr, nullptr, nullptr) == SQLITE_OK) {
          locked_.store(true);
          std::this_thread::sleep_for(std::chrono::duration<double>(hold_s));
          sqlite3_exec(h, "ROLLBACK", nullptr, nullptr, nullptr);
        }
      }
      sqlite3_close(h);
      done_.store(true);
    });
  }
  ~DbLocker() { thread_.join(); }
  bool locked() const { return locked_.load(); }

 private:
  std::atomic<bool> locked_{false}, done_{false};
  std::thread thread_;
};

class Trial {
 public:
  Trial(const Config& cfg, std::mt19937_64& rng, int index) : cfg_(cfg), rng_(rng) {
    r_.index = index;
    dir_ = std::filesystem::temp_directory_path() / fmt::format("kp-campaign-{}-{}", getpid(), index);
    std::filesystem::create_directories(dir_);
  }
  ~Trial() {
    server_.reset();
    if (mounted_) umount2((dir_ / "disk").c_str(), MNT_DETACH);
    std::error_code ec;
    std::filesystem::remove_all(dir_, ec);
  }

  TrialResult Run();

 private:
  double Uniform(double lo, double hi) { return std::uniform_real_distribution<double>(lo, hi)(rng_); }
  int Pick(int n) { return std::uniform_int_distribution<int>(0, n - 1)(rng_); }
  std::string File(const char* name) const { return (dir_ / name).string(); }

  // stderr goes to `log` in the trial's folder (kept when the trial fails).
  pid_t Start(std::vector<std::string> args, const std::string& crash, int stdout_fd, const char* log) {
    std::fflush(nullptr);
    const std::string log_path = File(log);
    pid_t pid = fork();
    if (pid == 0) {
      if (!crash.empty()) setenv("KNEEPOINT_INJECT_CRASH", crash.c_str(), 1);
      int devnull = ::open("/dev/null", O_WRONLY);
      int err = ::open(log_path.c_str(), O_WRONLY | O_CREAT | O_APPEND, 0644);
      dup2(stdout_fd >= 0 ? stdout_fd : devnull, 1);
      dup2(err >= 0 ? err : devnull, 2);
      args.insert(args.begin(), "kneepoint");
      std::vector<char*> argv;
      for (std::string& a : args) argv.push_back(a.data());
      _exit(cli::RunCli(static_cast<int>(argv.size()), argv.data()));
    }
    return pid;
  }
  int64_t Samples(int64_t run_id, double* last_t = nullptr) {
    Store::Options o;
    o.create = false;
    o.read_only = true;
    auto s = Store::Open(db_, wall_, o);
    if (!s.ok()) return -1;
    auto v = (*s)->LoadSamples(run_id);
    if (!v.ok()) return -1;
    if (last_t != nullptr) *last_t = v->empty() ? 0.0 : v->back().t_s;
    return static_cast<int64_t>(v->size());
  }
  std::optional<RunRow> Newest() {
    Store::Options o;
    o.create = false;
    o.read_only = true;
    auto s = Store::Open(db_, wall_, o);
    if (!s.ok()) return std::nullopt;
    auto runs = (*s)->ListRuns();
    if (!runs.ok() || runs->empty()) return std::nullopt;
    return runs->back();
  }
  bool OutputsOff() {
    if (bench_->load_input_on() || bench_->supply_output_on()) return false;
    const std::string& a = server_->client_addresses()[0];
    if (a.rfind("tcp:", 0) != 0) return true;
    auto t = OpenTransport(a);
    if (!t.ok()) return false;
    ScpiOptions so;
    so.timeout = Seconds(0.3);
    so.retries = 0;
    so.error_queue = false;
    ScpiSession s(std::move(*t), wall_, so);
    auto r = s.Query("INP?");
    return r.ok() && *r == "0";
  }

  const Config& cfg_;
  std::mt19937_64& rng_;
  TrialResult r_;
  std::filesystem::path dir_;
  bool mounted_ = false;
  std::string db_;
  SteadyClock wall_;
  std::unique_ptr<SteadyClock> clock_;
  std::unique_ptr<sim::SimBench> bench_;
  std::unique_ptr<ReadingClock> load_clock_;
  std::unique_ptr<HostileMeter> meter_;
  std::unique_ptr<sim::SimServer> server_;
};

TrialResult Trial::Run() {
  // What this trial does, all from the seed.
  const int kind = Pick(100);
  Kill kill = kind < 32 ? Kill::kSigkill : kind < 52 ? Kill::kSegv : kind < 64 ? Kill::kSighup : kind < 74 ? Kill::kSigpipe
              : kind < 79 ? Kill::kHang : kind < 88 ? Kill::kLinkFault : kind < 96 ? Kill::kHostile : Kill::kFullDisk;
  for (int k = 0; !cfg_.only.empty() && k <= static_cast<int>(Kill::kFullDisk); ++k)
    if (cfg_.only == KillName(static_cast<Kill>(k))) kill = static_cast<Kill>(k);
  r_.kill = kill;
  r_.link = Pick(3) == 0 ? "pty" : "tcp";
  sim::FaultOptions faults;
  Hostility hostile = Hostility::kNone;
  if (kill == Kill::kLinkFault) {
    switch (Pick(6)) {
      case 0: faults.drop_every = 3 + Pick(5), r_.fault = fmt::format("drop every {}", faults.drop_every); break;
      case 1: faults.corrupt_every = 3 + Pick(5), r_.fault = fmt::format("corrupt every {}", faults.corrupt_every); break;
      case 2:
        faults.delay_every = 3 + Pick(5), faults.delay_s = 0.05 + Uniform(0, 0.4);
        r_.fault = fmt::format("delay every {} by {:.2f} s", faults.delay_every, faults.delay_s);
        break;
      case 3: faults.disconnect_at = 20 + Pick(60), r_.fault = fmt::format("disconnect at query {}", faults.disconnect_at); break;
      case 4: faults.error_every = 10 + Pick(30), r_.fault = fmt::format("error reply every {}", faults.error_every); break;
      default: faults.stick_at = 20 + Pick(60), r_.fault = fmt::format("readings stuck from query {}", faults.stick_at); break;
    }
  } else if (kill == Kill::kHostile) {
    hostile = static_cast<Hostility>(1 + Pick(5));
    // The simulator serves every pty from one thread: an endless line that
    // nobody reads any more fills the pty and stalls the other instruments
    // with it, which separate instruments would not do. Over TCP only.
    if (hostile == Hostility::kEndless) r_.link = "tcp";
    r_.fault = HostilityName(hostile);
  }
  r_.locked_db = (kill == Kill::kSigkill || kill == Kill::kSegv || kill == Kill::kSigpipe || kill == Kill::kHang) && Pick(8) == 0;
  // A full disk: the database alone on a 2 MiB tmpfs (when this user may
  // mount one), filled up by another file at a random moment; the runner must
  // end the run itself with the load off. The reason cannot be stored on a
  // full disk: it is taken from the runner's stderr.
  db_ = File("campaign.db");
  if (kill == Kill::kFullDisk) {
    std::filesystem::path disk = dir_ / "disk";
    std::filesystem::create_directories(disk);
    if (mount("kp-campaign", disk.c_str(), "tmpfs", 0, "size=2m") == 0) {
      mounted_ = true;
      r_.full_disk = true;
      db_ = (disk / "campaign.db").string();
    } else {
      r_.note = fmt::format("full disk skipped: cannot mount a tmpfs here ({}); SIGKILL instead; ", std::strerror(errno));
      kill = r_.kill = Kill::kSigkill;
    }
  }

  // The bench and its server.
  clock_ = std::make_unique<SteadyClock>(cfg_.speed);
  bench_ = std::make_unique<sim::SimBench>(sim::DemoLiIonCell(2.56), *clock_);
  load_clock_ = std::make_unique<ReadingClock>(bench_->load(), *clock_);
  meter_ = std::make_unique<HostileMeter>(bench_->meter(), hostile, 15 + Pick(40));
  auto server = sim::SimServer::Start(*ParseAddress(r_.link == "pty" ? "pty" : "tcp:127.0.0.1:0"),
                                      {{"load", load_clock_.get()}, {"meter", meter_.get()}, {"thermometer", &bench_->thermometer()},
                                       {"supply", &bench_->supply()}},
                                      faults);
  if (!server.ok()) {
    r_.note = "simulator did not start: " + server.status().ToString();
    r_.past_bound = true;
    return r_;
  }
  server_ = std::move(*server);
  const auto& a = server_->client_addresses();
  std::string rig = fmt::format("[bench]\nname = \"campaign\"\nclock_speed = {}\nmax_current_a = 5.0\n", cfg_.speed);
  const char* roles[] = {"load", "meter", "thermometer", "supply"};
  for (int i = 0; i < 4; ++i)
    rig += fmt::format("\n[[instrument]]\nname = \"sim {}\"\naddress = \"{}\"\nprofile = \"kneepoint-sim\"\nroles = [\"{}\"]\ntimeout_s = 0.5\n",
                       roles[i], a[i], roles[i]);
  std::ofstream(File("rig.toml")) << rig;
  std::ofstream(File("discharge.kpp")) << "cell li-ion rated=2500mAh nominal=3.6V max=4.2V cutoff=2.75V max-temp=60degC\n"
                                          "safety max-temp=55degC\n"
                                          "discharge 1A until voltage<=2.75V or time>=30min every=1s\n";
  std::vector<std::string> args = {"run", File("discharge.kpp"), "--rig", File("rig.toml"), "--db", db_, "--cell", "campaign-cell",
                                   "--progress", "60s"};
  if (kill == Kill::kHang) args.insert(args.end(), {"--hang-limit", "2s"});
  std::string crash;
  if (kill == Kill::kSegv) crash = fmt::format("SEGV@{}", 5 + Pick(60));
  int pipe_fds[2] = {-1, -1};
  if (kill == Kill::kSigpipe && pipe(pipe_fds) == 0) close(pipe_fds[0]);  // a reader that is gone
  const Clk::time_point t_start = Clk::now();
  pid_t pid = Start(args, crash, pipe_fds[1], "run.log");
  if (pipe_fds[1] >= 0) close(pipe_fds[1]);

  // The run under way: its first samples committed, the load on.
  int64_t run_id = 0;
  while (Since(t_start) < 15.0 && run_id == 0) {
    std::this_thread::sleep_for(std::chrono::milliseconds(20));
    if (auto run = Newest(); run && Samples(run->id) >= 2) run_id = run->id;
    if (Ended(pid)) break;
  }
  // A random moment.
  const double wait_s = Uniform(0.05, 1.5);
  std::unique_ptr<DbLocker> locker;
  Clk::time_point t_signal = Clk::now();
  siginfo_t info{};
  auto dead = [&] {
    info = {};
    return waitid(P_PID, static_cast<id_t>(pid), &info, WEXITED | WNOHANG | WNOWAIT) == 0 && info.si_pid == pid;
  };
  const std::string filler = (dir_ / "disk" / "filler").string();
  if (kill == Kill::kLinkFault || kill == Kill::kHostile || kill == Kill::kFullDisk) {
    // The runner ends it by itself within its bound, or copes (retries, a
    // held step, a reconnect) and is killed then. A hostile reply and a full
    // disk must never be coped with.
    Clk::time_point from = t_start;
    double bound_s = kFaultBoundS;
    if (kill == Kill::kFullDisk) {
      std::this_thread::sleep_for(std::chrono::duration<double>(wait_s));
      std::ofstream fill(filler, std::ios::binary);
      std::string block(4096, '\0');
      while (fill.write(block.data(), static_cast<std::streamsize>(block.size())) && fill.flush()) {
      }
      from = Clk::now();
      bound_s = kFullDiskBoundS;
    }
    while (!dead() && Since(from) < bound_s) std::this_thread::sleep_for(std::chrono::milliseconds(10));
    t_signal = Clk::now();
    if (!dead()) {
      r_.note += "runner coped; SIGKILL";
      if (kill != Kill::kLinkFault) r_.past_bound = true;
      SendSignal(pid, SIGKILL);
    }
  } else {
    std::this_thread::sleep_for(std::chrono::duration<double>(wait_s));
    if (r_.locked_db) {
      locker = std::make_unique<DbLocker>(db_, Uniform(1.0, 3.0));
      for (int i = 0; i < 100 && !locker->locked(); ++i) std::this_thread::sleep_for(std::chrono::milliseconds(5));
    }
    t_signal = Clk::now();
    switch (kill) {
      case Kill::kSigkill: SendSignal(pid, SIGKILL); break;
      case Kill::kSighup: SendSignal(pid, SIGHUP); break;
      case Kill::kHang: SendSignal(pid, SIGSTOP); break;
      case Kill::kSigpipe: {
        SendSignal(pid, SIGPIPE);
        std::this_thread::sleep_for(std::chrono::milliseconds(300));
        if (dead()) {
          r_.note += "SIGPIPE ended the runner";
          r_.past_bound = true;
        } else {
          t_signal = Clk::now();
          SendSignal(pid, SIGKILL);
        }
        break;
      }
      default: break;  // SEGV: the injected crash comes by itself
    }
  }
  // The runner's end (bounded: a hang needs the guardian's 2 s + polling).
  while (!dead() && Since(t_signal) < 30.0) std::this_thread::sleep_for(std::chrono::milliseconds(1));
  if (!dead()) {
    r_.past_bound = true;
    r_.note += " runner still alive 30 s after the signal";
    SendSignal(pid, SIGKILL);
    while (!dead()) std::this_thread::sleep_for(std::chrono::milliseconds(5));
  }
  const Clk::time_point t_dead = Clk::now();
  r_.runner_s = std::chrono::duration<double>(t_dead - t_start).count();
  r_.died_abnormally = info.si_code == CLD_KILLED || info.si_code == CLD_DUMPED;
  // Off, as the simulated instruments say.
  while (Since(t_dead) < 5.0) {
    if (OutputsOff()) {
      r_.off_after_s = Since(t_dead);
      break;
    }
    std::this_thread::sleep_for(std::chrono::milliseconds(2));
  }
  load_clock_->Freeze();
  // The record (the guardian may wait for a locked database).
  std::optional<RunRow> run;
  // (On a full disk the end cannot be recorded: no use waiting for it.)
  for (Clk::time_point t0 = Clk::now(); Since(t0) < (r_.full_disk ? 1.0 : 20.0);) {
    run = Newest();
    if (run && run->outcome != Outcome::kRunning) break;
    std::this_thread::sleep_for(std::chrono::milliseconds(20));
  }
  int status = 0;
  waitpid(pid, &status, 0);
  locker.reset();
  if (r_.full_disk) {
    std::filesystem::remove(filler);  // room again, for the checks and the resume
    if (run && run->outcome == Outcome::kRunning) {
      std::ifstream in(File("run.log"));
      std::string line, reason;
      while (std::getline(in, line))
        if (line.rfind("kneepoint: run ", 0) == 0) reason = line;
      run->reason = "(stderr only, the disk was full) " + reason;
    }
  }
  if (run) {
    r_.outcome = OutcomeName(run->outcome);
    r_.reason = run->reason;
  } else {
    r_.outcome = "no run";
  }
  r_.integrity_ok = Pragma(db_) == "ok";
  if (run) {
    double last_t = 0;
    Samples(run->id, &last_t);
    auto [first, last] = load_clock_->Span();
    if (first >= 0) {
      r_.lost_run_s = std::max(0.0, (last - first) - last_t);
      r_.lost_wall_s = r_.lost_run_s / cfg_.speed;
    }
  }
  // Resume continues an interrupted run.
  // (A run whose end could not be recorded on a full disk is marked
  // interrupted by the next open, resume's included.)
  if (run && (run->outcome == Outcome::kInterrupted || (r_.full_disk && run->outcome == Outcome::kRunning))) {
    double before_t = 0;
    int64_t before = Samples(run->id, &before_t);
    // A second try, as an operator would, when the first was refused (a
    // reply the faulty link delayed past the dead runner can still be on
    // its way and answer the resume's *IDN?).
    int64_t now = before;
    for (int attempt = 0; attempt < 2 && now <= before; ++attempt) {
      if (attempt > 0) {
        std::this_thread::sleep_for(std::chrono::milliseconds(500));
        r_.note += " resume needed a second try;";
      }
      pid_t again = Start({"resume", std::to_string(run->id), "--db", db_, "--rig", File("rig.toml")}, "", -1, "resume.log");
      for (Clk::time_point t0 = Clk::now(); Since(t0) < 10.0 && now <= before;) {
        std::this_thread::sleep_for(std::chrono::milliseconds(20));
        now = Samples(run->id);
        if (Ended(again)) break;
      }
      SendSignal(again, SIGTERM);
      waitpid(again, nullptr, 0);
    }
    r_.resumed = now > before ? "yes" : "no";
    if (r_.resumed == "no") {
      std::ifstream in(File("resume.log"));
      std::string line, last;
      while (std::getline(in, line))
        if (!line.empty()) last = line;
      r_.note += " resume: " + last;
    }
    if (!OutputsOff()) r_.note += " outputs on after resume stopped";
    if (Pragma(db_) != "ok") r_.integrity_ok = false;
  }
  return r_;
}

}  // namespace
}  // namespace kp

int main(int argc, char** argv) {
  using namespace kp;
  Config cfg;
  for (int i = 1; i + 1 < argc; i += 2) {
    std::string k = argv[i];
    if (k == "--trials") cfg.trials = std::atoi(argv[i + 1]);
    else if (k == "--seed") cfg.seed = std::strtoull(argv[i + 1], nullptr, 10);
    else if (k == "--budget-s") cfg.budget_s = std::atof(argv[i + 1]);
    else if (k == "--speed") cfg.speed = std::atof(argv[i + 1]);
    else if (k == "--only") cfg.only = argv[i + 1];
    else {
      std::fprintf(stderr, "usage: %s [--trials N] [--seed S] [--budget-s SECONDS] [--speed K] [--only KIND]\n", argv[0]);
      return 2;
    }
  }
  std::printf("fault campaign: %d trials, seed %llu, budget %.0f s, simulator speed %.0fx\n", cfg.trials,
              static_cast<unsigned long long>(cfg.seed), cfg.budget_s, cfg.speed);
  std::fflush(stdout);
  std::mt19937_64 rng(cfg.seed);
  const Clk::time_point t0 = Clk::now();
  std::vector<TrialResult> results;
  for (int i = 0; i < cfg.trials && Since(t0) < cfg.budget_s; ++i) {
    Trial trial(cfg, rng, i);
    TrialResult r = trial.Run();
    std::printf("%3d %-4s %-13s %-28s%s%s ended %s after %.2f s | off %+.3f s | %s%s | lost %.2f s wall | db %s | resume %s | %s%s\n", r.index,
                r.link.c_str(), KillName(r.kill), r.fault.c_str(), r.locked_db ? " [db locked]" : "", r.full_disk ? " [tmpfs]" : "",
                r.died_abnormally ? "by signal" : "by itself", r.runner_s, r.off_after_s, r.outcome.c_str(),
                r.reason.empty() ? "" : (": " + r.reason.substr(0, 90)).c_str(), r.lost_wall_s, r.integrity_ok ? "ok" : "CORRUPT",
                r.resumed.c_str(), r.past_bound ? "PAST BOUND " : "", r.note.c_str());
    std::fflush(stdout);
    results.push_back(std::move(r));
  }

  // Figures.
  int abnormal = 0, off_2s = 0, corrupt = 0, over_window = 0, faults = 0, faults_ok = 0, past = 0, interrupted = 0, resumed = 0;
  std::map<std::string, int> by_kind;
  std::vector<double> offs;
  double worst_lost = 0, worst_lost_locked = 0;
  for (const TrialResult& r : results) {
    const bool fault_trial = r.kill == Kill::kLinkFault || r.kill == Kill::kHostile || r.kill == Kill::kFullDisk;
    const bool ended_abnormally = r.died_abnormally || r.kill == Kill::kSighup;
    if (ended_abnormally) {
      ++abnormal;
      ++by_kind[r.died_abnormally && fault_trial ? "SIGKILL (faulty link)" : r.kill == Kill::kSigpipe ? "SIGPIPE then SIGKILL"
                                                                                                      : KillName(r.kill)];
      if (r.off_after_s >= 0 && r.off_after_s <= 2.0) ++off_2s;
      if (r.off_after_s >= 0) offs.push_back(r.off_after_s);
    }
    if (fault_trial && !r.died_abnormally) {
      ++faults;
      if (r.off_after_s >= 0 && r.off_after_s <= 2.0 && !r.reason.empty()) ++faults_ok;
    }
    if (!r.integrity_ok) ++corrupt;
    // Kills on a sound link and an unlocked database: one commit window (1 s
    // wall) plus one sample's slack. While another process holds the
    // database, nothing can be committed: what was staged meanwhile is lost
    // too, reported apart.
    if (r.died_abnormally && !fault_trial && !r.locked_db) {
      if (r.lost_wall_s > 1.0 + 0.25) ++over_window;
      worst_lost = std::max(worst_lost, r.lost_wall_s);
    }
    if (r.died_abnormally && r.locked_db) worst_lost_locked = std::max(worst_lost_locked, r.lost_wall_s);
    if (r.past_bound) ++past;
    if (r.resumed != "-") ++interrupted;
    if (r.resumed == "yes") ++resumed;
  }
  std::sort(offs.begin(), offs.end());
  auto pct = [&](double q) { return offs.empty() ? -1.0 : offs[std::min(offs.size() - 1, static_cast<size_t>(q * offs.size()))]; };
  std::printf("\nfigures (seed %llu, %zu trials in %.0f s):\n", static_cast<unsigned long long>(cfg.seed), results.size(), Since(t0));
  std::printf("  abnormal ends: %d (", abnormal);
  bool first = true;
  for (const auto& [k, n] : by_kind) {
    std::printf("%s%s %d", first ? "" : ", ", k.c_str(), n);
    first = false;
  }
  std::printf(")\n  load and supply read off within 2 s of the runner's end: %d of %d (median %.3f s, worst %.3f s)\n", off_2s, abnormal,
              pct(0.5), offs.empty() ? -1.0 : offs.back());
  std::printf("  link faults, hostile replies and full disks ended by the runner: %d, with the load off and a stored reason: %d\n", faults,
              faults_ok);
  std::printf("  interrupted runs resumed: %d, continuing: %d\n", interrupted, resumed);
  std::printf("  databases failing integrity_check: %d\n", corrupt);
  std::printf("  samples lost at a kill: worst %.2f s of wall time (%.0f s of run time); kills over one commit window: %d\n", worst_lost,
              worst_lost * cfg.speed, over_window);
  std::printf("  samples lost at a kill while the database was locked by another process: worst %.2f s of wall time\n",
              worst_lost_locked);
  std::printf("  trials past their bound: %d\n", past);
  const bool ok = off_2s == abnormal && corrupt == 0 && over_window == 0 && faults_ok == faults && past == 0 && resumed == interrupted;
  std::printf("%s\n", ok ? "all targets met" : "TARGETS MISSED");
  return ok ? 0 : 1;
}
