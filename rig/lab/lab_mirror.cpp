#include "rig/lab/lab_mirror.h"

#include <fmt/format.h>

#include <unordered_map>

#include "rig/lab/lab_schema.h"

namespace kp::lab {
namespace {

// Binds lab value (row, col) of kind `kind` to SQLite parameter `index`.
void BindLab(sql::Stmt& st, int index, const pg::PgResult& r, int row, int col, char kind) {
  if (r.IsNull(row, col)) {
    st.BindNull(index);
  } else if (kind == 'i') {
    st.Bind(index, r.Int(row, col));
  } else if (kind == 'r') {
    st.Bind(index, r.Real(row, col));
  } else {
    st.Bind(index, r.View(row, col));
  }
}

}  // namespace

Result<std::unique_ptr<LabMirror>> LabMirror::Open(const std::string& url, Clock& wall) { return OpenWith(url, wall, nullptr); }

Result<std::unique_ptr<LabMirror>> LabMirror::OpenOnly(const std::string& url, Clock& wall, const std::vector<std::string>& uuids) {
  return OpenWith(url, wall, &uuids);
}

Result<std::unique_ptr<LabMirror>> LabMirror::OpenWith(const std::string& url, Clock& wall, const std::vector<std::string>* only) {
  std::unique_ptr<LabMirror> m(new LabMirror());
  KP_ASSIGN_OR_RETURN(m->conn_, pg::PgConn::Connect(url));
  KP_RETURN_IF_ERROR(m->conn_->Exec("SET default_transaction_read_only = on"));
  KP_ASSIGN_OR_RETURN(int v, LabSchemaVersion(*m->conn_));
  if (v == 0) return NotFound(fmt::format("{} holds no kneepoint lab data yet (send some with `kneepoint sync --to`)", pg::RedactUrl(url)));
  if (v > kLabSchemaVersion)
    return InvalidInput(fmt::format("{}: lab schema version {}, newer than this kneepoint reads ({}); use a newer kneepoint",
                                    pg::RedactUrl(url), v, kLabSchemaVersion));
  if (v < kLabSchemaVersion)
    return InvalidInput(fmt::format("{}: lab schema version {} (this kneepoint reads {}); a `kneepoint sync` to it upgrades it",
                                    pg::RedactUrl(url), v, kLabSchemaVersion));
  Store::Options o;
  o.create = true;
  o.commit_interval_s = 1e9;
  KP_ASSIGN_OR_RETURN(m->store_, Store::Open(":memory:", wall, o));
  KP_RETURN_IF_ERROR(m->LoadRuns(only));
  return m;
}

Status LabMirror::LoadRuns(const std::vector<std::string>* only) {
  sql::Db& db = store_->db();
  const auto& cols = LabRunColumns();
  std::string sel, ins, marks;
  int n = 0;
  for (const LabColumn& c : cols) {
    sel += fmt::format("{}{}{}", sel.empty() ? "" : ", ", c.lab, std::string_view(c.lab) == "uuid" ? "::text" : "");
    std::string_view bench(c.bench);
    if (!bench.starts_with("t.") || bench == "t.id") continue;  // cells columns and the bench number are not runs columns
    ins += fmt::format(", {}", bench.substr(2));
    marks += fmt::format(", ?{}", ++n + 2);
  }
  // Only UUIDs go into the array literal (checked), as one parameter.
  std::string list = "{";
  if (only != nullptr) {
    for (const std::string& u : *only) {
      if (u.size() != 36 || u.find_first_not_of("0123456789abcdefABCDEF-") != std::string::npos)
        return InvalidInput(fmt::format("'{}' is not a run UUID", u));
      list += (list.size() > 1 ? "," : "") + u;
    }
  }
  list += "}";
  std::vector<pg::Param> params;
  if (only != nullptr) params.push_back(list);
  KP_ASSIGN_OR_RETURN(auto r, conn_->Query(fmt::format("SELECT {} FROM kneepoint.runs {} ORDER BY started_at, bench, bench_run_id, uuid", sel,
                                                       only != nullptr ? "WHERE uuid = ANY($1::uuid[])" : ""),
                                           params));
  KP_RETURN_IF_ERROR(db.Exec("BEGIN"));
  auto fail = [&](Status st) {
    (void)db.Exec("ROLLBACK");
    return st;
  };
  auto cell = db.Prepare("INSERT INTO cells(name, chemistry, rated_mah, created_at) VALUES (?1, ?2, ?3, ?4) ON CONFLICT(name) DO NOTHING");
  auto cell_id = db.Prepare("SELECT id FROM cells WHERE name = ?1");
  auto run = db.Prepare(fmt::format("INSERT INTO runs(id, cell_id{}) VALUES (?1, ?2{})", ins, marks));
  if (!cell.ok()) return fail(cell.status());
  if (!cell_id.ok()) return fail(cell_id.status());
  if (!run.ok()) return fail(run.status());
  auto col_of = [&](std::string_view lab) {
    for (size_t i = 0; i < cols.size(); ++i)
      if (lab == cols[i].lab) return static_cast<int>(i);
    return -1;
  };
  const int ccell = col_of("cell"), cchem = col_of("chemistry"), crated = col_of("cell_rated_mah"), ccreated = col_of("cell_created_at");
  for (int row = 0; row < r.rows(); ++row) {
    cell->Reset();
    cell->Bind(1, r.View(row, ccell)).Bind(2, r.View(row, cchem)).Bind(3, r.Real(row, crated)).Bind(4, r.View(row, ccreated));
    if (Status st = cell->Run(); !st.ok()) return fail(st);
    cell_id->Reset();
    cell_id->Bind(1, r.View(row, ccell));
    auto has = cell_id->Step();
    if (!has.ok()) return fail(has.status());
    const int64_t cid = cell_id->Int(0);
    run->Reset();
    run->Bind(1, static_cast<int64_t>(row + 1)).Bind(2, cid);
    int p = 3;
    for (size_t i = 0; i < cols.size(); ++i) {
      std::string_view bench(cols[i].bench);
      if (!bench.starts_with("t.") || bench == "t.id") continue;
      BindLab(*run, p++, r, row, static_cast<int>(i), cols[i].kind);
    }
    if (Status st = run->Run(); !st.ok()) return fail(st.WithContext("copying the lab's runs"));
    uuids_.push_back(r.Text(row, col_of("uuid")));
  }
  filled_.assign(uuids_.size(), false);
  // Tags and notes of every run (what `runs` filters on).
  std::unordered_map<std::string, int64_t> by_uuid;
  for (size_t i = 0; i < uuids_.size(); ++i) by_uuid[uuids_[i]] = static_cast<int64_t>(i + 1);
  {
    KP_ASSIGN_OR_RETURN(auto tags, conn_->Query(fmt::format("SELECT run_uuid::text, tag FROM kneepoint.run_tags {} ORDER BY run_uuid, tag",
                                                            only != nullptr ? "WHERE run_uuid = ANY($1::uuid[])" : ""),
                                                params));
    auto put = db.Prepare("INSERT INTO run_tags(run_id, tag) VALUES (?1, ?2)");
    if (!put.ok()) return fail(put.status());
    for (int row = 0; row < tags.rows(); ++row) {
      auto it = by_uuid.find(tags.Text(row, 0));
      if (it == by_uuid.end()) continue;
      put->Reset();
      put->Bind(1, it->second).Bind(2, tags.View(row, 1));
      if (Status st = put->Run(); !st.ok()) return fail(st);
    }
  }
  {
    KP_ASSIGN_OR_RETURN(auto notes, conn_->Query(fmt::format("SELECT run_uuid::text, t_s, kind, message, wall_at FROM kneepoint.events "
                                                             "WHERE kind = 'note' {} ORDER BY run_uuid, bench_event_id",
                                                             only != nullptr ? "AND run_uuid = ANY($1::uuid[])" : ""),
                                                 params));
    auto put = db.Prepare("INSERT INTO events(run_id, t_s, kind, message, wall_at) VALUES (?1, ?2, ?3, ?4, ?5)");
    if (!put.ok()) return fail(put.status());
    for (int row = 0; row < notes.rows(); ++row) {
      auto it = by_uuid.find(notes.Text(row, 0));
      if (it == by_uuid.end()) continue;
      put->Reset();
      put->Bind(1, it->second).Bind(2, notes.Real(row, 1)).Bind(3, notes.View(row, 2)).Bind(4, notes.View(row, 3)).Bind(5, notes.View(row, 4));
      if (Status st = put->Run(); !st.ok()) return fail(st);
    }
  }
  return db.Exec("COMMIT");
}

Status LabMirror::Fill(int64_t run_id) {
  if (run_id < 1 || run_id > static_cast<int64_t>(uuids_.size())) return NotFound(fmt::format("no run {} in the lab database", run_id));
  if (filled_[run_id - 1]) return Status::Ok();
  const std::string& uuid = uuids_[run_id - 1];
  sql::Db& db = store_->db();
  KP_RETURN_IF_ERROR(db.Exec("BEGIN"));
  Status st = [&]() -> Status {
    // Its notes came with the listing; all its events come now, in order.
    KP_ASSIGN_OR_RETURN(auto del, db.Prepare("DELETE FROM events WHERE run_id = ?1"));
    KP_RETURN_IF_ERROR(del.Bind(1, run_id).Run());
    for (const LabTable& t : LabTables()) {
      std::string lab_cols, bench_cols, marks;
      int n = 1;
      for (const LabColumn& c : t.columns) {
        lab_cols += fmt::format("{}{}", lab_cols.empty() ? "" : ", ", c.lab);
        // Event ids are numbers of one bench file: the copy numbers its own.
        if (std::string_view(t.name) == "events" && std::string_view(c.bench) == "id") continue;
        bench_cols += fmt::format(", {}", c.bench);
        marks += fmt::format(", ?{}", ++n);
      }
      KP_ASSIGN_OR_RETURN(auto r, conn_->Query(fmt::format("SELECT {} FROM kneepoint.{} WHERE run_uuid = $1 ORDER BY {}", lab_cols, t.name,
                                                           t.mark_lab),
                                               {uuid}));
      KP_ASSIGN_OR_RETURN(auto put, db.Prepare(fmt::format("INSERT INTO {}(run_id{}) VALUES (?1{})", t.name, bench_cols, marks)));
      for (int row = 0; row < r.rows(); ++row) {
        put.Reset();
        put.Bind(1, run_id);
        int p = 2;
        for (size_t c = 0; c < t.columns.size(); ++c) {
          if (std::string_view(t.name) == "events" && std::string_view(t.columns[c].bench) == "id") continue;
          BindLab(put, p++, r, row, static_cast<int>(c), t.columns[c].kind);
        }
        KP_RETURN_IF_ERROR(put.Run());
      }
    }
    return Status::Ok();
  }();
  if (!st.ok()) {
    (void)db.Exec("ROLLBACK");
    return st.WithContext("copying run " + uuid + " from the lab database");
  }
  KP_RETURN_IF_ERROR(db.Exec("COMMIT"));
  filled_[run_id - 1] = true;
  return Status::Ok();
}

Result<int64_t> LabMirror::FillRef(std::string_view ref) {
  KP_ASSIGN_OR_RETURN(int64_t id, store_->ResolveRun(ref));
  KP_RETURN_IF_ERROR(Fill(id));
  return id;
}

Result<std::unique_ptr<Store>> OpenLabStore(const std::string& url, Clock& wall, const std::vector<std::string>& refs) {
  KP_ASSIGN_OR_RETURN(auto m, LabMirror::Open(url, wall));
  for (const std::string& ref : refs) KP_RETURN_IF_ERROR(m->FillRef(ref).status());
  return m->TakeStore();
}

}  // namespace kp::lab
