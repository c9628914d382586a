#include "rig/guardian.h"
#include "rig/rig_channels.h"

#include "drivers/device_sysfs.h"

#include <fmt/format.h>

#include <algorithm>
#include <atomic>
#include <cerrno>
#include <chrono>
#include <csignal>
#include <cstdio>
#include <cstring>
#include <ctime>
#include <filesystem>
#include <vector>

#include <fcntl.h>
#include <netdb.h>
#include <netinet/in.h>
#include <netinet/tcp.h>
#include <linux/usb/tmc.h>
#include <sys/ioctl.h>
#include <poll.h>
#include <sys/socket.h>
#include <sys/wait.h>
#include <termios.h>
#include <unistd.h>

#include "drivers/address.h"
#include "drivers/clock.h"
#include "drivers/stream_transport.h"
#include "rig/sqlite.h"

namespace kp {
namespace {

std::atomic<int> g_guardian_fd{-1};

constexpr char kCleanEnd = 'E';
constexpr char kFatal = 'F';
constexpr char kArmed = 'R';
// Wall seconds spent checking the outputs after a clean end.
constexpr double kCleanEndCheckS = 5.0;

// One output to switch off, everything prepared before the fork.
struct Target {
  std::string name;     // the rig file's instrument name
  std::string what;     // "load input" / "supply output"
  std::string address;  // as written
  std::string eol;
  std::string first_lines;  // eol, state query, off command, state query (round 1)
  std::string retry_lines;  // off command, state query (later rounds)
  std::string query;        // for messages
  bool tcp = false;
  sockaddr_storage sa{};
  socklen_t sa_len = 0;
  std::string path;
  SerialSettings serial;
  double timeout_s = 1.0;
  // usbtmc: one message per write, one reply per read (the driver asks the
  // instrument on read), so the lines go one by one.
  bool usbtmc = false;
  std::string query_line, off_line;  // with their terminators
};

// What happened to one target; filled without allocating.
struct TargetResult {
  int found = -1;  // state before the off command: 1 on, 0 off, -1 unknown
  bool off_sent = false;
  bool verified = false;
  double verified_after_s = -1.0;  // since the runner's end
  int attempts = 0;
  char error[160] = "";
};

double MonoNow() {
  timespec ts{};
  ::clock_gettime(CLOCK_MONOTONIC, &ts);
  return static_cast<double>(ts.tv_sec) + static_cast<double>(ts.tv_nsec) * 1e-9;
}

void SleepS(double s) {
  if (s <= 0) return;
  timespec ts{static_cast<time_t>(s), static_cast<long>((s - static_cast<double>(static_cast<time_t>(s))) * 1e9)};
  while (::nanosleep(&ts, &ts) != 0 && errno == EINTR) {
  }
}

// stderr without stdio or allocation.
void Say(const char* text) {
  size_t len = std::strlen(text);
  while (len > 0) {
    ssize_t n = ::write(2, text, len);
    if (n <= 0) return;
    text += n;
    len -= static_cast<size_t>(n);
  }
}

bool WriteAll(int fd, const char* data, size_t len, bool socket, double deadline) {
  while (len > 0) {
    ssize_t n = socket ? ::send(fd, data, len, MSG_NOSIGNAL) : ::write(fd, data, len);
    if (n > 0) {
      data += n;
      len -= static_cast<size_t>(n);
      continue;
    }
    if (n < 0 && (errno == EAGAIN || errno == EINTR)) {
      double left = deadline - MonoNow();
      if (left <= 0) return false;
      pollfd p{fd, POLLOUT, 0};
      ::poll(&p, 1, static_cast<int>(left * 1000) + 1);
      continue;
    }
    return false;
  }
  return true;
}

int Connect(const Target& t, double deadline, char* error, size_t error_len) {
  if (t.tcp) {
    int fd = ::socket(t.sa.ss_family, SOCK_STREAM | SOCK_CLOEXEC | SOCK_NONBLOCK, 0);
    if (fd < 0) {
      std::snprintf(error, error_len, "socket: %s", std::strerror(errno));
      return -1;
    }
    int one = 1;
    ::setsockopt(fd, IPPROTO_TCP, TCP_NODELAY, &one, sizeof one);
    if (::connect(fd, reinterpret_cast<const sockaddr*>(&t.sa), t.sa_len) != 0) {
      if (errno != EINPROGRESS) {
        std::snprintf(error, error_len, "connect: %s", std::strerror(errno));
        ::close(fd);
        return -1;
      }
      pollfd p{fd, POLLOUT, 0};
      double left = deadline - MonoNow();
      int r = left > 0 ? ::poll(&p, 1, static_cast<int>(left * 1000) + 1) : 0;
      int err = 0;
      socklen_t len = sizeof err;
      if (r <= 0 || ::getsockopt(fd, SOL_SOCKET, SO_ERROR, &err, &len) != 0 || err != 0) {
        std::snprintf(error, error_len, "connect: %s", r <= 0 ? "timed out" : std::strerror(err));
        ::close(fd);
        return -1;
      }
    }
    return fd;
  }
  int fd = ::open(t.path.c_str(), O_RDWR | O_NOCTTY | O_NONBLOCK | O_CLOEXEC);
  if (fd < 0) {
    std::snprintf(error, error_len, "open %s: %s", t.path.c_str(), std::strerror(errno));
    return -1;
  }
  if (!ConfigureTermios(fd, t.serial, t.path).ok()) {
    std::snprintf(error, error_len, "cannot configure %s", t.path.c_str());
    ::close(fd);
    return -1;
  }
  // Whatever the dead runner left unread is not an answer to us.
  ::tcflush(fd, TCIOFLUSH);
  return fd;
}

// Collects up to `want` state replies (1/0/ON/OFF lines; other lines are
// skipped) until the deadline. Returns how many were read; -1 when the link
// broke before any.
int ReadStates(int fd, int want, int* states, double deadline) {
  char buf[512];
  size_t used = 0;
  int got = 0;
  while (got < want) {
    double left = deadline - MonoNow();
    if (left <= 0) break;
    pollfd p{fd, POLLIN, 0};
    int r = ::poll(&p, 1, static_cast<int>(left * 1000) + 1);
    if (r < 0 && errno == EINTR) continue;
    if (r <= 0) break;
    if (used == sizeof buf) used = 0;  // an endless line: drop it
    ssize_t n = ::read(fd, buf + used, sizeof buf - used);
    if (n < 0 && (errno == EAGAIN || errno == EINTR)) continue;
    if (n <= 0) return got > 0 ? got : -1;
    used += static_cast<size_t>(n);
    size_t start = 0;
    for (size_t i = 0; i < used && got < want; ++i) {
      if (buf[i] != '\n' && buf[i] != '\r') continue;
      std::optional<bool> s = ParseStateReply(std::string_view(buf + start, i - start));
      if (s) states[got++] = *s ? 1 : 0;
      start = i + 1;
    }
    std::memmove(buf, buf + start, used - start);
    used -= start;
  }
  return got;
}

// One usbtmc exchange: the query's reply as a state (1 on, 0 off, -1 none).
int UsbtmcState(int fd, const Target& t) {
  if (::write(fd, t.query_line.data(), t.query_line.size()) != static_cast<ssize_t>(t.query_line.size())) return -1;
  char buf[256];
  ssize_t n = ::read(fd, buf, sizeof buf);
  if (n <= 0) return -1;
  size_t len = static_cast<size_t>(n);
  while (len > 0 && (buf[len - 1] == '\n' || buf[len - 1] == '\r')) --len;
  std::optional<bool> s = ParseStateReply(std::string_view(buf, len));
  return s ? (*s ? 1 : 0) : -1;
}

void SwitchOffUsbtmc(const Target& t, double ended_at, double give_up, TargetResult& res) {
  bool first = true;
  while (!res.verified && MonoNow() < give_up) {
    ++res.attempts;
    int fd = ::open(t.path.c_str(), O_RDWR | O_CLOEXEC);
    if (fd < 0) {
      std::snprintf(res.error, sizeof res.error, "open %s: %s", t.path.c_str(), std::strerror(errno));
      SleepS(0.1);
      continue;
    }
    auto ms = static_cast<uint32_t>(std::max(100.0, t.timeout_s * 1000.0));
    (void)::ioctl(fd, USBTMC_IOCTL_SET_TIMEOUT, &ms);
    if (first) res.found = UsbtmcState(fd, t);
    first = false;
    if (::write(fd, t.off_line.data(), t.off_line.size()) != static_cast<ssize_t>(t.off_line.size())) {
      std::snprintf(res.error, sizeof res.error, "write failed: %s", std::strerror(errno));
      ::close(fd);
      SleepS(0.1);
      continue;
    }
    res.off_sent = true;
    int state = UsbtmcState(fd, t);
    ::close(fd);
    if (state == 0) {
      res.verified = true;
      res.verified_after_s = MonoNow() - ended_at;
      res.error[0] = '\0';
      break;
    }
    if (state == 1) std::snprintf(res.error, sizeof res.error, "%s still reads on after the off command", t.query.c_str());
    else std::snprintf(res.error, sizeof res.error, "no state reply to %s within %.1f s", t.query.c_str(), t.timeout_s);
  }
}

// Switches one target off and verifies it by query; gives up at `give_up`.
void SwitchOff(const Target& t, double ended_at, double give_up, TargetResult& res) {
  if (t.usbtmc) return SwitchOffUsbtmc(t, ended_at, give_up, res);
  bool first = true;
  while (!res.verified && MonoNow() < give_up) {
    ++res.attempts;
    double round_deadline = std::min(give_up, MonoNow() + t.timeout_s);
    int fd = Connect(t, round_deadline, res.error, sizeof res.error);
    if (fd < 0) {
      SleepS(0.1);
      continue;
    }
    const std::string& lines = first ? t.first_lines : t.retry_lines;
    if (!WriteAll(fd, lines.data(), lines.size(), t.tcp, round_deadline)) {
      std::snprintf(res.error, sizeof res.error, "write failed: %s", std::strerror(errno));
      ::close(fd);
      SleepS(0.1);
      continue;
    }
    res.off_sent = true;
    int states[2] = {-1, -1};
    int want = first ? 2 : 1;
    int got = ReadStates(fd, want, states, round_deadline);
    ::close(fd);
    if (first && got >= 1) res.found = states[0];
    first = false;
    if (got == want && states[want - 1] == 0) {
      res.verified = true;
      res.verified_after_s = MonoNow() - ended_at;
      res.error[0] = '\0';
      break;
    }
    if (got == want) std::snprintf(res.error, sizeof res.error, "%s still reads on after the off command", t.query.c_str());
    else std::snprintf(res.error, sizeof res.error, "no state reply to %s within %.1f s", t.query.c_str(), t.timeout_s);
  }
}

// How the runner ended, from /proc/<pid>/stat while it is a zombie (field 52,
// exit_code, in waitpid form). Returns false when that is no longer visible.
bool RunnerExitCode(pid_t pid, int& code) {
  char path[64];
  std::snprintf(path, sizeof path, "/proc/%d/stat", static_cast<int>(pid));
  for (int tries = 0; tries < 50; ++tries) {
    int fd = ::open(path, O_RDONLY | O_CLOEXEC);
    if (fd < 0) return false;
    char buf[1024];
    ssize_t n = ::read(fd, buf, sizeof buf - 1);
    ::close(fd);
    if (n <= 0) return false;
    buf[n] = '\0';
    const char* p = std::strrchr(buf, ')');
    if (p == nullptr) return false;
    ++p;
    // Fields after the command: 3 (state) ... 52 (exit_code).
    int field = 2;
    const char* tok = p;
    char state = '?';
    long long value = 0;
    while (*tok != '\0') {
      while (*tok == ' ') ++tok;
      if (*tok == '\0') break;
      ++field;
      if (field == 3) state = *tok;
      if (field == 52) value = std::strtoll(tok, nullptr, 10);
      while (*tok != ' ' && *tok != '\0') ++tok;
    }
    if ((state == 'Z' || state == 'X') && field >= 52) {
      code = static_cast<int>(value);
      return true;
    }
    SleepS(0.002);  // still exiting
  }
  return false;
}

std::string SignalText(int sig) {
  const char* abbrev = ::sigabbrev_np(sig);
  return abbrev != nullptr ? fmt::format("signal {} (SIG{})", sig, abbrev) : fmt::format("signal {}", sig);
}

std::string HostName() {
  char buf[256] = {};
  if (::gethostname(buf, sizeof buf - 1) != 0) return "unknown";
  return buf;
}

// The guardian's view of the database: plain SQL on the runner's tables, no
// migration (the runner owns the schema).
class RunBook {
 public:
  RunBook(std::string path, pid_t runner, int64_t resume_run_id)
      : path_(std::move(path)), runner_(runner), resume_run_id_(resume_run_id), host_(HostName()) {}

  bool Open() {
    if (db_) return true;
    auto db = sql::Db::Open(path_, /*create=*/false);
    if (!db.ok()) return false;
    db_ = std::move(*db);
    // Watching must not wait on the runner's locks: a heartbeat read that
    // cannot be had at once is simply tried again a second later.
    sqlite3_busy_timeout(db_->raw(), 100);
    return true;
  }
  // Newest run claimed by the runner: id, heartbeat (0 when none); with
  // `any_outcome`, whatever its outcome (after a clean end), else only one
  // running or interrupted. `running` is false for a run not (or no longer)
  // under way: its heartbeat says nothing about the runner.
  bool Find(int64_t& run_id, int64_t& heartbeat, bool* running = nullptr, bool any_outcome = false) {
    if (!Open()) return false;
    auto q = db_->Prepare(
        "SELECT id, COALESCE(heartbeat_at, 0), outcome = 'running' FROM runs WHERE runner_pid=?1 AND runner_host=?2 AND id>=?3"
        " AND (?5 OR outcome IN ('running', 'interrupted')) AND (?4 = 0 OR id = ?4) ORDER BY id DESC LIMIT 1");
    if (!q.ok()) return false;
    q->Bind(1, static_cast<int64_t>(runner_)).Bind(2, host_).Bind(3, first_new_id_).Bind(4, resume_run_id_);
    q->Bind(5, static_cast<int64_t>(any_outcome ? 1 : 0));
    Result<bool> row = q->Step();
    if (!row.ok() || !*row) return false;
    run_id = q->Int(0);
    heartbeat = q->Int(1);
    if (running != nullptr) *running = q->Int(2) != 0;
    return true;
  }
  // Adds events to a run without changing its outcome.
  Status Note(int64_t run_id, const std::vector<std::pair<std::string, std::string>>& events, const std::string& wall_at) {
    if (!Open()) return Unavailable(fmt::format("cannot open {}", path_));
    sqlite3_busy_timeout(db_->raw(), 5000);
    KP_RETURN_IF_ERROR(db_->Exec("BEGIN IMMEDIATE"));
    auto body = [&]() -> Status {
      for (const auto& [kind, message] : events) {
        KP_ASSIGN_OR_RETURN(auto ev, db_->Prepare("INSERT INTO events(run_id, t_s, kind, message, wall_at)"
                                                  " SELECT id, COALESCE(progress_t_s, 0), ?1, ?2, ?3 FROM runs WHERE id=?4"));
        KP_RETURN_IF_ERROR(ev.Bind(1, kind).Bind(2, message).Bind(3, wall_at).Bind(4, run_id).Run());
      }
      return db_->Exec("COMMIT");
    };
    Status st = body();
    if (!st.ok()) (void)db_->Exec("ROLLBACK");
    return st;
  }
  // Runs created from now on are this runner's (a resumed run is named).
  void NoteBaseline() {
    if (resume_run_id_ != 0 || !Open()) return;
    auto q = db_->Prepare("SELECT COALESCE(MAX(id), 0) FROM runs");
    if (!q.ok()) return;
    Result<bool> row = q->Step();
    if (row.ok() && *row) first_new_id_ = q->Int(0) + 1;
  }
  // Marks the run interrupted with `reason` and adds the events, in one
  // transaction; only a run still running or interrupted is changed.
  Status Record(int64_t run_id, const std::string& reason, const std::vector<std::pair<std::string, std::string>>& events,
                const std::string& wall_at) {
    if (!Open()) return Unavailable(fmt::format("cannot open {}", path_));
    sqlite3_busy_timeout(db_->raw(), 5000);
    KP_RETURN_IF_ERROR(db_->Exec("BEGIN IMMEDIATE"));
    auto body = [&]() -> Status {
      KP_ASSIGN_OR_RETURN(auto up, db_->Prepare("UPDATE runs SET outcome='interrupted', reason=?1 WHERE id=?2"
                                                " AND outcome IN ('running', 'interrupted')"));
      KP_RETURN_IF_ERROR(up.Bind(1, reason).Bind(2, run_id).Run());
      if (sqlite3_changes(db_->raw()) == 0) return Status::Ok();
      for (const auto& [kind, message] : events) {
        KP_ASSIGN_OR_RETURN(auto ev, db_->Prepare("INSERT INTO events(run_id, t_s, kind, message, wall_at)"
                                                  " SELECT id, COALESCE(progress_t_s, 0), ?1, ?2, ?3 FROM runs WHERE id=?4"));
        KP_RETURN_IF_ERROR(ev.Bind(1, kind).Bind(2, message).Bind(3, wall_at).Bind(4, run_id).Run());
      }
      return db_->Exec("COMMIT");
    };
    Status st = body();
    if (!st.ok()) (void)db_->Exec("ROLLBACK");
    return st;
  }

 private:
  std::string path_;
  pid_t runner_;
  int64_t resume_run_id_;
  std::string host_;
  int64_t first_new_id_ = 0;
  std::unique_ptr<sql::Db> db_;
};

struct ChildPlan {
  std::vector<Target> targets;
  GuardianOptions options;
  pid_t runner = 0;
};

// Outputs found on (or not verifiable) after the runner had ended its run
// itself: switched off all the same, and noted on the run, whose outcome
// stays what the runner recorded.
[[noreturn]] void RecordAfterCleanEnd(const ChildPlan& plan, RunBook& book, const TargetResult* results, size_t n) {
  SteadyClock wall;
  std::vector<std::pair<std::string, std::string>> events;
  bool all_off = true;
  for (size_t i = 0; i < n; ++i) {
    const Target& t = plan.targets[i];
    const TargetResult& res = results[i];
    all_off = all_off && res.verified;
    if (res.verified && res.found != 1) continue;
    const char* found = res.found == 1 ? "found ON" : "state not read";
    std::string msg = res.verified ? fmt::format("after the runner's own end, {} '{}' ({}) was {}; switched off, verified off by {} {:.2f} s later",
                                                 t.what, t.name, t.address, found, t.query, res.verified_after_s)
                                   : fmt::format("after the runner's own end, {} '{}' ({}): {}; NOT verified off: {}", t.what, t.name, t.address,
                                                 found, res.error);
    Say(fmt::format("kneepoint guardian: {}\n", msg).c_str());
    events.emplace_back(res.verified ? "guardian" : "fault", msg);
  }
  int64_t id = 0, beat = 0;
  if (book.Find(id, beat, nullptr, /*any_outcome=*/true)) {
    Status st = book.Note(id, events, wall.WallTimeIso());
    if (!st.ok()) Say(fmt::format("kneepoint guardian: could not record on run {}: {}\n", id, st.ToString()).c_str());
  }
  ::_exit(all_off ? 0 : 1);
}

[[noreturn]] void GuardianMain(const ChildPlan& plan, int from_runner, int to_runner) {
  ::setsid();
  struct sigaction ign {};
  ign.sa_handler = SIG_IGN;
  sigemptyset(&ign.sa_mask);
  for (int sig : {SIGINT, SIGHUP, SIGQUIT, SIGTERM, SIGPIPE, SIGTSTP, SIGTTIN, SIGTTOU}) ::sigaction(sig, &ign, nullptr);
  struct sigaction dfl {};
  dfl.sa_handler = SIG_DFL;
  sigemptyset(&dfl.sa_mask);
  for (int sig : {SIGSEGV, SIGABRT, SIGBUS, SIGFPE, SIGILL, SIGCHLD}) ::sigaction(sig, &dfl, nullptr);
  sigset_t none;
  sigemptyset(&none);
  ::sigprocmask(SIG_SETMASK, &none, nullptr);
  // Nothing of the runner's open files: only the two pipe ends and stderr.
  int lo = std::min(from_runner, to_runner), hi = std::max(from_runner, to_runner);
  if (lo > 3) ::close_range(3, static_cast<unsigned>(lo - 1), 0);
  if (hi > lo + 1) ::close_range(static_cast<unsigned>(lo + 1), static_cast<unsigned>(hi - 1), 0);
  ::close_range(static_cast<unsigned>(hi + 1), ~0U, 0);
  int devnull = ::open("/dev/null", O_RDWR | O_CLOEXEC);
  if (devnull >= 0) {
    ::dup2(devnull, 0);
    ::dup2(devnull, 1);
    ::close(devnull);
  }

  RunBook book(plan.options.db_path, plan.runner, plan.options.resume_run_id);
  book.NoteBaseline();
  char armed = kArmed;
  (void)!::write(to_runner, &armed, 1);
  ::close(to_runner);

  // Watch: the pipe, and the heartbeat once a second.
  bool clean = false;
  int fatal_signal = 0;
  bool hung = false;
  double hung_for_s = 0.0;
  int64_t run_id = 0, last_beat = -1;
  double last_change = MonoNow();
  bool pending_fatal = false;
  for (;;) {
    pollfd p{from_runner, POLLIN, 0};
    int r = ::poll(&p, 1, 1000);
    if (r < 0 && errno == EINTR) continue;
    if (r > 0) {
      char buf[64];
      ssize_t n = ::read(from_runner, buf, sizeof buf);
      if (n < 0 && errno == EINTR) continue;
      if (n <= 0) break;  // the runner is gone (or closed after a clean end)
      for (ssize_t i = 0; i < n; ++i) {
        if (pending_fatal) {
          fatal_signal = static_cast<unsigned char>(buf[i]);
          pending_fatal = false;
        } else if (buf[i] == kCleanEnd) {
          clean = true;
        } else if (buf[i] == kFatal) {
          pending_fatal = true;
        }
      }
      continue;
    }
    // A killed runner that does not go away (stuck in the kernel) still gets
    // its outputs switched off.
    if (hung && MonoNow() - last_change - hung_for_s > 5.0) break;
    if (hung || clean) continue;
    int64_t id = 0, beat = 0;
    bool running = false;
    if (book.Find(id, beat, &running) && running) {
      if (id != run_id || beat != last_beat) {
        run_id = id;
        last_beat = beat;
        last_change = MonoNow();
      } else if (MonoNow() - last_change > plan.options.hang_limit_s) {
        hung = true;
        hung_for_s = MonoNow() - last_change;
        char msg[160];
        std::snprintf(msg, sizeof msg, "kneepoint guardian: no heartbeat from runner %d for %.0f s: killing it\n",
                      static_cast<int>(plan.runner), hung_for_s);
        Say(msg);
        ::kill(plan.runner, SIGKILL);
      }
    }
  }
  const double ended_at = MonoNow();

  // --- the path that matters: no allocation until every output is verified off ---
  // After a clean end too: the runner has closed its links by then, and an
  // off command it sent may have been lost on the way. Silent when all was off.
  int exit_code = 0;
  const bool code_known = !clean && RunnerExitCode(plan.runner, exit_code);
  TargetResult results[16];
  const size_t n_targets = std::min<size_t>(plan.targets.size(), 16);
  const double give_up = ended_at + (clean ? std::min(plan.options.give_up_s, kCleanEndCheckS) : plan.options.give_up_s);
  for (size_t i = 0; i < n_targets; ++i) SwitchOff(plan.targets[i], ended_at, give_up, results[i]);
  if (clean) {
    bool all_found_off = true;
    for (size_t i = 0; i < n_targets; ++i) all_found_off = all_found_off && results[i].verified && results[i].found != 1;
    if (all_found_off) ::_exit(0);
    RecordAfterCleanEnd(plan, book, results, n_targets);
  }
  for (size_t i = 0; i < n_targets; ++i) {
    char msg[320];
    std::snprintf(msg, sizeof msg, "kneepoint guardian: %s '%s' (%s): %s\n", plan.targets[i].what.c_str(), plan.targets[i].name.c_str(),
                  plan.targets[i].address.c_str(), results[i].verified ? "switched off, verified" : results[i].error);
    Say(msg);
  }

  // --- then the record ---
  SteadyClock wall;
  std::string how;
  if (hung) {
    how = fmt::format("runner {} hung (no heartbeat for {:.0f} s; limit {:.0f} s) and was killed by the guardian", plan.runner,
                      hung_for_s, plan.options.hang_limit_s);
  } else if (fatal_signal != 0) {
    how = fmt::format("runner {} crashed: {}", plan.runner, SignalText(fatal_signal));
  } else if (code_known && (exit_code & 0x7f) != 0) {
    how = fmt::format("runner {} was killed by {}", plan.runner, SignalText(exit_code & 0x7f));
  } else if (code_known) {
    how = fmt::format("runner {} exited with status {} without ending its run", plan.runner, (exit_code >> 8) & 0xff);
  } else {
    how = fmt::format("runner {} ended without ending its run (its exit status was already collected)", plan.runner);
  }
  std::vector<std::pair<std::string, std::string>> events;
  events.emplace_back("guardian", how + fmt::format(" at {}", wall.WallTimeIso()));
  bool all_off = true;
  std::string switched;
  for (size_t i = 0; i < n_targets; ++i) {
    const Target& t = plan.targets[i];
    const TargetResult& res = results[i];
    const char* found = res.found == 1 ? "found on" : res.found == 0 ? "found off" : "state not read";
    std::string msg;
    if (res.verified) {
      msg = fmt::format("{} '{}' ({}): {}; switched off, verified off by {} {:.2f} s after the runner's end ({} attempt{})", t.what, t.name,
                        t.address, found, t.query, res.verified_after_s, res.attempts, res.attempts == 1 ? "" : "s");
      switched += (switched.empty() ? "" : ", ") + t.what + " '" + t.name + "'";
    } else {
      all_off = false;
      msg = fmt::format("{} '{}' ({}): {}; NOT verified off after {:.0f} s ({} attempt{}): {}", t.what, t.name, t.address, found,
                        plan.options.give_up_s, res.attempts, res.attempts == 1 ? "" : "s", res.error);
    }
    events.emplace_back(res.verified ? "guardian" : "fault", msg);
  }
  std::string reason = how + (all_off ? "; the guardian switched off and verified " + (switched.empty() ? std::string("nothing") : switched)
                                      : "; the guardian could NOT verify every output off (see events)");
  int64_t id = run_id, beat = 0;
  Status st = Unavailable("no run of this runner found");
  const double record_until = MonoNow() + plan.options.give_up_s;
  for (;;) {
    if (id == 0 && !book.Find(id, beat)) id = 0;
    if (id != 0) st = book.Record(id, reason, events, wall.WallTimeIso());
    if (st.ok() || MonoNow() > record_until) break;
    SleepS(0.5);
  }
  if (!st.ok() && id != 0)
    Say(fmt::format("kneepoint guardian: could not record on run {}: {}\n", id, st.ToString()).c_str());
  Say(fmt::format("kneepoint guardian: {}\n", reason).c_str());
  ::_exit(all_off ? 0 : 1);
}

Result<std::vector<Target>> PrepareTargets(const RigFileSpec& rig, const std::vector<std::string>& slots) {
  std::vector<Target> loads, supplies;
  // What to switch: each load and supply instrument of a one-cell rig; on a
  // multi-channel rig each load and supply channel of the slots this runner
  // runs (other processes may be running the others).
  struct Switch {
    const InstrumentSpec* is;
    std::string role, name;
    InstrumentProfile profile;
  };
  std::vector<Switch> switches;
  if (rig.channels.empty()) {
    for (const InstrumentSpec& is : rig.instruments)
      for (const std::string& role : is.roles)
        if (role == "load" || role == "supply") switches.push_back({&is, role, is.name, is.profile});
  } else {
    for (const ChannelSpec& c : rig.channels) {
      if (!slots.empty() && std::find(slots.begin(), slots.end(), c.slot) == slots.end()) continue;
      for (auto [role, b] : {std::pair<const char*, const ChannelBinding*>{"load", &c.load}, {"supply", &c.supply}}) {
        if (!b->bound()) continue;
        const InstrumentSpec& is = rig.instruments.at(static_cast<size_t>(b->instrument));
        switches.push_back({&is, role, BindingText(rig, *b), BoundProfile(rig, *b)});
      }
    }
  }
  for (const Switch& sw : switches) {
    {
      const InstrumentSpec& is = *sw.is;
      const std::string& role = sw.role;
      KP_ASSIGN_OR_RETURN(Address a, ParseAddress(is.address));
      Target t;
      t.name = sw.name;
      t.address = is.address;
      t.eol = a.eol;
      t.timeout_s = std::max(0.2, is.timeout_s);
      std::string off, query;
      if (role == "load") {
        t.what = "load input";
        off = sw.profile.load.input_off;
        query = sw.profile.load.input_state.empty() ? ReadBackQuery(off) : sw.profile.load.input_state;
      } else {
        t.what = "supply output";
        off = sw.profile.supply.output_off;
        query = sw.profile.supply.output_state.empty() ? ReadBackQuery(off) : sw.profile.supply.output_state;
      }
      if (off.empty() || query.empty())
        return InvalidInput(fmt::format("{}:{}: instrument '{}': the profile has no off command or state query for the {}", rig.path,
                                        is.line, is.name, t.what));
      t.query = query;
      // A channel chosen by a select line: the select goes before each line.
      const std::string sel = sw.profile.channel_select.empty() ? "" : sw.profile.channel_select + a.eol;
      // A leading terminator ends whatever line the dead runner left half-written.
      t.first_lines = a.eol + sel + query + a.eol + sel + off + a.eol + sel + query + a.eol;
      t.retry_lines = sel + off + a.eol + sel + query + a.eol;
      if (a.kind == Address::Kind::kTcp) {
        t.tcp = true;
        addrinfo hints{};
        hints.ai_family = AF_UNSPEC;
        hints.ai_socktype = SOCK_STREAM;
        addrinfo* res = nullptr;
        std::string port = std::to_string(a.port);
        int gai = ::getaddrinfo(a.host.c_str(), port.c_str(), &hints, &res);
        if (gai != 0 || res == nullptr)
          return IoError(fmt::format("{}:{}: instrument '{}': cannot resolve '{}': {}", rig.path, is.line, is.name, a.host, ::gai_strerror(gai)));
        std::memcpy(&t.sa, res->ai_addr, res->ai_addrlen);
        t.sa_len = static_cast<socklen_t>(res->ai_addrlen);
        ::freeaddrinfo(res);
      } else if (a.kind == Address::Kind::kSerial) {
        t.path = a.path;
        t.serial = a.serial;
      } else if (a.kind == Address::Kind::kUsbtmc) {
        // A USB identity is looked up now, before the fork.
        if (Status st = ResolveUsbtmc(a); !st.ok())
          return st.WithContext(fmt::format("{}:{}: instrument '{}'", rig.path, is.line, is.name));
        t.usbtmc = true;
        t.path = a.path;
        t.query_line = query + a.eol;
        t.off_line = off + a.eol;
      } else if (a.kind == Address::Kind::kVxi11) {
        return InvalidInput(fmt::format(
            "{}:{}: instrument '{}': the guardian that switches a {} off when the runner dies cannot speak VXI-11; address it "
            "by its raw socket (tcp:HOST:5025 or TCPIP0::HOST::5025::SOCKET) or over USB",
            rig.path, is.line, is.name, t.what));
      } else {
        return InvalidInput(fmt::format("{}:{}: instrument '{}': no address the guardian can reach", rig.path, is.line, is.name));
      }
      (role == "load" ? loads : supplies).push_back(std::move(t));
    }
  }
  // Loads first: they drain the cell.
  for (Target& t : supplies) loads.push_back(std::move(t));
  if (loads.size() > 16) return InvalidInput(fmt::format("{}: more than 16 loads and supplies", rig.path));
  return loads;
}

extern "C" void OnFatalSignal(int sig) {
  int fd = g_guardian_fd.load();
  if (fd >= 0) {
    char msg[2] = {kFatal, static_cast<char>(sig)};
    (void)!::write(fd, msg, sizeof msg);
  }
  ::signal(sig, SIG_DFL);
  ::raise(sig);
}

}  // namespace

double DefaultHangLimitS(double link_grace_s, double longest_sample_period_s, double clock_speed) {
  double speed = clock_speed > 0 ? clock_speed : 1.0;
  return kGuardianMinHangS + (link_grace_s + 3.0 * longest_sample_period_s) / speed;
}

void InstallFatalSignalNotice() {
  struct sigaction sa {};
  sa.sa_handler = OnFatalSignal;
  sigemptyset(&sa.sa_mask);
  sa.sa_flags = SA_RESETHAND | SA_NODEFER;
  for (int sig : {SIGSEGV, SIGABRT, SIGBUS, SIGFPE, SIGILL}) ::sigaction(sig, &sa, nullptr);
}

// Whether this process has `db` (or its journal files) open: the guardian is
// a fork, and SQLite keeps per-file lock bookkeeping process-wide, which a
// child must not inherit for the file it opens itself.
bool DatabaseOpenHere(const std::string& db) {
  namespace fs = std::filesystem;
  std::error_code ec;
  fs::path base = fs::weakly_canonical(fs::absolute(db, ec), ec);
  if (ec) return false;
  for (const auto& entry : fs::directory_iterator("/proc/self/fd", ec)) {
    fs::path target = fs::read_symlink(entry.path(), ec);
    if (ec) continue;
    for (const char* suffix : {"", "-wal", "-shm", "-journal"})
      if (target == fs::path(base.string() + suffix)) return true;
  }
  return false;
}

Result<std::unique_ptr<Guardian>> Guardian::Start(const RigFileSpec& rig, const GuardianOptions& options) {
  if (DatabaseOpenHere(options.db_path))
    return InternalError(fmt::format("{} is open in this process; the guardian must be started before the database is opened",
                                     options.db_path));
  ChildPlan plan;
  KP_ASSIGN_OR_RETURN(plan.targets, PrepareTargets(rig, options.slots));
  plan.options = options;
  plan.runner = ::getpid();
  int down[2], up[2];
  if (::pipe2(down, O_CLOEXEC) != 0) return IoError(fmt::format("guardian pipe: {}", std::strerror(errno)));
  if (::pipe2(up, O_CLOEXEC) != 0) {
    ::close(down[0]);
    ::close(down[1]);
    return IoError(fmt::format("guardian pipe: {}", std::strerror(errno)));
  }
  std::fflush(nullptr);
  pid_t pid = ::fork();
  if (pid < 0) {
    for (int fd : {down[0], down[1], up[0], up[1]}) ::close(fd);
    return IoError(fmt::format("cannot start the guardian: fork: {}", std::strerror(errno)));
  }
  if (pid == 0) GuardianMain(plan, down[0], up[1]);
  ::close(down[0]);
  ::close(up[1]);
  // Armed within 5 s, or no run.
  char c = 0;
  pollfd p{up[0], POLLIN, 0};
  int r = 0;
  for (double until = MonoNow() + 5.0; MonoNow() < until;) {
    r = ::poll(&p, 1, 100);
    if (r > 0 || (r < 0 && errno != EINTR)) break;
  }
  bool armed = r > 0 && ::read(up[0], &c, 1) == 1 && c == kArmed;
  ::close(up[0]);
  if (!armed) {
    ::close(down[1]);
    ::kill(pid, SIGKILL);
    ::waitpid(pid, nullptr, 0);
    return Unavailable("the guardian process did not start; refusing to run without it");
  }
  g_guardian_fd.store(down[1]);
  InstallFatalSignalNotice();
  return std::unique_ptr<Guardian>(new Guardian(pid, down[1]));
}

void Guardian::CleanEnd() {
  if (to_guardian_ < 0) return;
  g_guardian_fd.store(-1);
  char c = kCleanEnd;
  (void)!::write(to_guardian_, &c, 1);
  ::close(to_guardian_);
  to_guardian_ = -1;
  for (int i = 0; i < 500; ++i) {
    pid_t w = ::waitpid(pid_, nullptr, WNOHANG);
    if (w == pid_ || (w < 0 && errno == ECHILD)) return;
    SleepS(0.01);
  }
}

bool Guardian::Alive() {
  if (to_guardian_ < 0) return false;
  return ::waitpid(pid_, nullptr, WNOHANG) == 0;
}

Guardian::~Guardian() { CleanEnd(); }

}  // namespace kp
