// `check FILE`: validates a procedure without a rig and prints the expanded
// plan with estimated duration and charge per step. Exit 2 on errors, each as
// "file:line:col: message".
#include <fmt/format.h>

#include <fstream>
#include <iostream>

#include "analysis/duration_format.h"
#include "drivers/profile.h"
#include "procedures/estimate.h"
#include "ui/cli/cli.h"
#include "ui/cli/procedure_file.h"

namespace kp::cli {
namespace {

struct CheckOptions {
  std::string file;
  double min_sample_s = 0.05;
  std::string soc;  // state of charge at the start ("40%"); empty: full
};

// A file that is an instrument dialect rather than a procedure: by its
// extension, or (the older format, also named .kpp) by a first key 'roles'.
bool LooksLikeDialect(const std::string& path) {
  if (IsDialectPath(path)) return true;
  std::ifstream in(path, std::ios::binary);
  std::string line;
  while (std::getline(in, line)) {
    size_t b = line.find_first_not_of(" \t\r");
    if (b == std::string::npos || line[b] == '#') continue;
    return line.compare(b, 5, "roles") == 0 || line.compare(b, 6, "format") == 0;
  }
  return false;
}

int CheckDialect(const std::string& path) {
  auto d = LoadProfileFile(path);
  if (!d.ok()) {
    std::cerr << d.status().message() << "\n";
    return ExitCodeFor(d.status());
  }
  std::string roles;
  for (const std::string& r : d->roles) roles += (roles.empty() ? "" : ", ") + r;
  std::cout << fmt::format("{}: instrument dialect for {} (identity '{}'){}: ok\n", path, roles, d->identity,
                           d->description.empty() ? "" : ", " + d->description);
  return kExitOk;
}

int RunCheck(const CheckOptions& opt) {
  if (LooksLikeDialect(opt.file)) return CheckDialect(opt.file);
  RigLimits rig;
  rig.min_sample_period_s = opt.min_sample_s;
  auto plan = LoadProcedure(opt.file, rig);
  if (!plan.ok()) {
    std::cerr << plan.status().message() << "\n";
    return ExitCodeFor(plan.status());
  }
  double start_soc = 1.0;
  if (!opt.soc.empty()) {
    auto soc = ParseStateOfCharge(opt.soc, "--soc");
    if (!soc.ok()) return Fail(soc.status());
    start_soc = *soc;
  }
  PlanEstimate est = EstimatePlan(*plan, start_soc);
  std::cout << DescribePlan(*plan, est);
  for (const std::string& w : plan->warnings) std::cerr << opt.file << ":" << w.substr(5) << " (warning)\n";
  // A plan that cannot finish before its own max-time would abort every night
  // (an incomplete estimate is a lower bound).
  if (est.total_s > plan->limits.max_total_s) {
    std::cerr << fmt::format("{}:1:1: the estimated duration {} exceeds the safety max-time {}: raise max-time= or shorten the "
                             "procedure\n",
                             opt.file, FormatHms(est.total_s), FormatHms(plan->limits.max_total_s));
    return kExitBadInput;
  }
  std::cout << opt.file << ": ok\n";
  return kExitOk;
}

}  // namespace

void RegisterCheck(CliRegistry& r) {
  static CheckOptions opt;
  opt = CheckOptions{};  // fresh defaults for each command line parsed
  CLI::App* c =
      r.Add("check", "Validate a procedure file and print the expanded plan with estimates (an instrument dialect .kpd is checked as one)", [] { return RunCheck(opt); });
  c->add_option("file", opt.file, "Procedure file (or instrument dialect file)")->required();
  AddQuantityOption(c, "--min-sample", opt.min_sample_s, Dimension::kTime, "Fastest full reading of the intended rig", 1e-6, 3600.0);
  c->add_option("--soc", opt.soc, "The cell's state of charge at the start, 40% or 0.4, for the estimates (default: full)");
}

}  // namespace kp::cli
