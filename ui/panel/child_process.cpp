#include "ui/panel/child_process.h"

#include <fcntl.h>
#include <sys/types.h>
#include <sys/wait.h>
#include <unistd.h>

#include <cerrno>
#include <cstring>

namespace kp::ui {
namespace {

std::vector<char*> Argv(const std::vector<std::string>& args) {
  std::vector<char*> out;
  for (const std::string& a : args) out.push_back(const_cast<char*>(a.c_str()));
  out.push_back(nullptr);
  return out;
}

}  // namespace

std::string SelfExecutable() {
  char buf[4096];
  ssize_t n = readlink("/proc/self/exe", buf, sizeof(buf) - 1);
  if (n <= 0) return "kneepoint";
  return std::string(buf, static_cast<size_t>(n));
}

Result<Captured> CaptureOutput(const std::vector<std::string>& argv) {
  if (argv.empty()) return InvalidInput("no command");
  int fds[2];
  if (pipe(fds) != 0) return IoError(std::string("pipe: ") + std::strerror(errno));
  std::vector<char*> args = Argv(argv);
  pid_t pid = fork();
  if (pid < 0) {
    close(fds[0]);
    close(fds[1]);
    return IoError(std::string("fork: ") + std::strerror(errno));
  }
  if (pid == 0) {
    dup2(fds[1], 1);
    dup2(fds[1], 2);
    close(fds[0]);
    close(fds[1]);
    execv(args[0], args.data());
    _exit(127);
  }
  close(fds[1]);
  Captured c;
  char buf[4096];
  for (;;) {
    ssize_t n = read(fds[0], buf, sizeof(buf));
    if (n < 0 && errno == EINTR) continue;
    if (n <= 0) break;
    c.output.append(buf, static_cast<size_t>(n));
  }
  close(fds[0]);
  int status = 0;
  while (waitpid(pid, &status, 0) < 0 && errno == EINTR) {
  }
  c.exit_code = WIFEXITED(status) ? WEXITSTATUS(status) : 128 + (WIFSIGNALED(status) ? WTERMSIG(status) : 0);
  if (c.exit_code == 127 && c.output.empty()) c.output = "could not start " + argv[0];
  return c;
}

Result<int> SpawnDetached(const std::vector<std::string>& argv, const std::string& log_path) {
  if (argv.empty()) return InvalidInput("no command");
  int report[2];  // grandchild pid travels back through this pipe
  if (pipe(report) != 0) return IoError(std::string("pipe: ") + std::strerror(errno));
  std::vector<char*> args = Argv(argv);
  pid_t pid = fork();
  if (pid < 0) return IoError(std::string("fork: ") + std::strerror(errno));
  if (pid == 0) {
    close(report[0]);
    setsid();
    pid_t grandchild = fork();
    if (grandchild != 0) {
      int gpid = static_cast<int>(grandchild);
      (void)!write(report[1], &gpid, sizeof(gpid));
      _exit(grandchild > 0 ? 0 : 1);
    }
    close(report[1]);
    int devnull = open("/dev/null", O_RDONLY);
    if (devnull >= 0) dup2(devnull, 0);
    int log = open(log_path.c_str(), O_WRONLY | O_CREAT | O_APPEND, 0644);
    if (log >= 0) {
      dup2(log, 1);
      dup2(log, 2);
    }
    execv(args[0], args.data());
    _exit(127);
  }
  close(report[1]);
  int gpid = -1;
  ssize_t n = read(report[0], &gpid, sizeof(gpid));
  close(report[0]);
  int status = 0;
  while (waitpid(pid, &status, 0) < 0 && errno == EINTR) {
  }
  if (n != sizeof(gpid) || gpid <= 0) return IoError("could not start the runner process");
  return gpid;
}

}  // namespace kp::ui
