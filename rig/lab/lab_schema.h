// The lab database: one PostgreSQL database that every bench's SQLite store
// syncs into (rig/lab/lab_sync.h), read by `runs`/`report`/`compare`/`export
// --db postgresql://...` and `kneepoint serve`. Its tables live in the schema
// `kneepoint` and mirror the bench tables with the run's UUID in place of the
// bench-local run number (documented in rig/LAB-DATABASE.md).
//
// The schema is created and migrated by kneepoint: kneepoint.schema_version
// holds one row per version applied; each step runs in one transaction under
// an advisory lock, so benches that start together migrate once.
#pragma once

#include <string>
#include <vector>

#include "drivers/status.h"
#include "rig/lab/pg.h"

namespace kp::lab {

inline constexpr int kLabSchemaVersion = 2;

// Brings the lab schema to `target` (default: this kneepoint's); refuses a
// database whose schema is newer than this kneepoint's.
Status MigrateLab(pg::PgConn& conn, int target = kLabSchemaVersion);
// The version the database holds (0: no kneepoint schema yet).
Result<int> LabSchemaVersion(pg::PgConn& conn);

// A column copied between a bench table and its lab table: how to read it
// from the bench (an SQLite expression over the bench table, aliased `t`),
// its lab name, and its kind ('i' integer, 'r' real, 't' text).
struct LabColumn {
  const char* bench;
  const char* lab;
  char kind;
};

// A per-run table copied from the bench (steps, events, samples...): its name
// on both sides, the column whose largest value on the server is where the
// next sync resumes (`mark`), whether rows change after they are first
// written (then rows from the mark on are sent again and updated), and its
// columns after run_uuid; the key is (run_uuid, mark).
struct LabTable {
  const char* name;
  const char* mark_bench;  // column in the bench table
  const char* mark_lab;    // the same in the lab table
  bool rows_change;
  std::vector<LabColumn> columns;
};

// The per-run tables in sync order (samples first: the heaviest, and what
// the others summarise).
const std::vector<LabTable>& LabTables();
// The runs columns (bench expressions over `runs t JOIN cells c`).
const std::vector<LabColumn>& LabRunColumns();

}  // namespace kp::lab
