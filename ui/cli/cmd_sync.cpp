// `sync`: copies a bench database to the lab's PostgreSQL database, once
// (rig/lab/lab_sync.h). Safe to run at any time, as often as wanted, while a
// run is logging and after any interruption: what the server already holds
// is skipped, never doubled.
#include <fmt/format.h>

#include <filesystem>
#include <iostream>
#include <nlohmann/json.hpp>

#include "ui/cli/cli.h"
#include "rig/lab/lab_sync.h"
#include "rig/lab/pg.h"

namespace kp::cli {

void RegisterSync(CliRegistry& r) {
  static std::string db_path, url;
  static int batch = 5000;
  static bool json = false;
  db_path = "kneepoint.db", url.clear(), batch = 5000, json = false;
  CLI::App* c = r.Add("sync", "Copy a bench database to the lab database (PostgreSQL), sending only what it lacks", [] {
    std::error_code ec;
    if (!std::filesystem::exists(db_path, ec)) return Fail(NotFound(fmt::format("no database at '{}' (give one with --db)", db_path)));
    lab::SyncOptions o;
    o.batch_rows = batch;
    auto stats = lab::SyncOnce(db_path, url, o);
    if (!stats.ok()) return Fail(stats.status());
    if (json) {
      nlohmann::json j = {{"schema_version", 1},          {"to", pg::RedactUrl(url)},   {"runs", stats->runs},
                          {"runs_sent", stats->runs_sent}, {"samples", stats->samples}, {"rows", stats->rows},
                          {"batches", stats->batches}};
      std::cout << j.dump(2) << "\n";
    } else {
      std::cout << fmt::format("{} run{} on the bench; {} with something new: {} samples, {} rows in {} batches sent to {}\n", stats->runs,
                               stats->runs == 1 ? "" : "s", stats->runs_sent, stats->samples, stats->rows, stats->batches,
                               pg::RedactUrl(url));
    }
    return kExitOk;
  });
  c->add_option("--db", db_path, "Bench database to copy from (only read)")->capture_default_str();
  c->add_option("--to", url, "Lab database, postgresql://[user@]host[:port]/dbname (libpq URI)")
      ->required()
      ->check([](const std::string& v) { return pg::IsPostgresUrl(v) ? std::string() : std::string("give a postgresql://... URL"); });
  c->add_option("--batch", batch, "Rows per COPY batch (one server transaction each)")->check(CLI::Range(1, 1000000))->capture_default_str();
  c->add_flag("--json", json, "Machine-readable summary");
}

}  // namespace kp::cli
