// `note RUN "text"`: adds a timestamped free-text note to a run, live or
// finished (an event of kind `note`, at the run time the run has reached).
// RUN is the run's number or its UUID (or a unique prefix of 8+ characters).
#include <iostream>

#include <fmt/format.h>

#include "rig/store_open.h"
#include "ui/cli/cli.h"

namespace kp::cli {

void RegisterNote(CliRegistry& r) {
  static std::string db_path, run_ref, text;
  db_path = "kneepoint.db", run_ref.clear(), text.clear();
  CLI::App* c = r.Add("note", "Add a timestamped note to a run (live or finished)", [] {
    SteadyClock wall;
    auto store = OpenExistingDb(db_path, wall);
    if (!store.ok()) return Fail(store.status());
    auto id = (*store)->ResolveRun(run_ref);
    if (!id.ok()) return Fail(id.status());
    if (text.find_first_not_of(" \t\r\n") == std::string::npos) return Fail(InvalidInput("the note is empty"));
    if (text.size() > 100000) return Fail(InvalidInput("the note is longer than 100000 characters"));
    if (Status st = (*store)->AddNote(*id, text); !st.ok()) return Fail(st);
    std::cout << fmt::format("note added to run {}\n", *id);
    return kExitOk;
  });
  c->add_option("RUN", run_ref, "Run number or UUID")->required();
  c->add_option("TEXT", text, "The note")->required();
  c->add_option("--db", db_path, "Database file")->capture_default_str();
}

}  // namespace kp::cli
