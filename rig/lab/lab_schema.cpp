#include "rig/lab/lab_schema.h"

#include <fmt/format.h>

namespace kp::lab {
namespace {

// v1: runs (keyed by UUID, with the bench and the bench's own run number),
// their tags and instruments (the equipment), step records, events and
// samples keyed by (run UUID, sample seq).
constexpr const char* kLabV1 = R"sql(
  CREATE TABLE kneepoint.runs(
    uuid uuid PRIMARY KEY,
    bench text NOT NULL,
    bench_run_id bigint NOT NULL,
    host text NOT NULL DEFAULT '',
    operator text NOT NULL DEFAULT '',
    cell text NOT NULL,
    chemistry text NOT NULL,
    cell_rated_mah double precision NOT NULL,
    cell_created_at text NOT NULL,
    cell_serial text NOT NULL DEFAULT '',
    cell_lot text NOT NULL DEFAULT '',
    cell_part text NOT NULL DEFAULT '',
    procedure_name text NOT NULL,
    procedure_text text NOT NULL,
    rig text NOT NULL,
    rig_text text NOT NULL DEFAULT '',
    rated_mah double precision NOT NULL,
    started_at text NOT NULL,
    ended_at text,
    outcome text NOT NULL CHECK (outcome IN ('running','completed','aborted','interrupted')),
    reason text NOT NULL DEFAULT '',
    heartbeat_at double precision,
    progress_t_s double precision,
    net_mah double precision NOT NULL DEFAULT 0,
    net_wh double precision NOT NULL DEFAULT 0,
    resumes bigint NOT NULL DEFAULT 0,
    delivered_mah double precision,
    delivered_wh double precision,
    charged_mah double precision,
    thermometer_tolerance_c double precision,
    sample_count bigint NOT NULL DEFAULT 0,
    software_version text NOT NULL DEFAULT '',
    software_commit text NOT NULL DEFAULT '',
    verdict text CHECK (verdict IN ('pass','fail','not judged')),
    verdict_text text,
    verdict_pct_of_rated double precision,
    synced_at timestamptz NOT NULL DEFAULT now());
  CREATE TABLE kneepoint.run_tags(
    run_uuid uuid NOT NULL REFERENCES kneepoint.runs(uuid),
    tag text NOT NULL,
    PRIMARY KEY (run_uuid, tag));
  CREATE TABLE kneepoint.instruments(
    run_uuid uuid NOT NULL REFERENCES kneepoint.runs(uuid),
    seq bigint NOT NULL,
    name text NOT NULL, roles text NOT NULL, address text NOT NULL, profile text NOT NULL,
    identity text NOT NULL, manufacturer text NOT NULL, model text NOT NULL, serial text NOT NULL, firmware text NOT NULL,
    voltage_gain double precision NOT NULL, voltage_offset_v double precision NOT NULL,
    current_gain double precision NOT NULL, current_offset_a double precision NOT NULL,
    temperature_gain double precision NOT NULL, temperature_offset_c double precision NOT NULL,
    calibrated_on text NOT NULL DEFAULT '',
    PRIMARY KEY (run_uuid, seq));
  CREATE TABLE kneepoint.steps(
    run_uuid uuid NOT NULL REFERENCES kneepoint.runs(uuid),
    seq bigint NOT NULL,
    idx bigint NOT NULL,
    kind text NOT NULL,
    label text NOT NULL,
    started_s double precision NOT NULL,
    ended_s double precision,
    end_reason text,
    mode text,
    level double precision,
    loop_pass bigint NOT NULL DEFAULT 0,
    cycle bigint NOT NULL DEFAULT 0,
    held_s double precision NOT NULL DEFAULT 0,
    record text NOT NULL DEFAULT 'migrated',
    charge_mah double precision,
    energy_wh double precision,
    voltage_time_vs double precision,
    PRIMARY KEY (run_uuid, seq));
  CREATE TABLE kneepoint.events(
    run_uuid uuid NOT NULL REFERENCES kneepoint.runs(uuid),
    bench_event_id bigint NOT NULL,
    t_s double precision NOT NULL,
    kind text NOT NULL,
    message text NOT NULL,
    wall_at text NOT NULL,
    PRIMARY KEY (run_uuid, bench_event_id));
  CREATE TABLE kneepoint.samples(
    run_uuid uuid NOT NULL REFERENCES kneepoint.runs(uuid),
    seq bigint NOT NULL,
    t_s double precision NOT NULL,
    voltage_v double precision NOT NULL,
    current_a double precision NOT NULL,
    temperature_c double precision NOT NULL,
    step bigint NOT NULL,
    PRIMARY KEY (run_uuid, seq));
  CREATE INDEX runs_by_started ON kneepoint.runs(started_at);
)sql";

// v2: the block summaries (what reports and the panel read instead of the
// samples), DC-IR points, the bench's fingerprint of a run as last synced
// (so an unchanged run costs one comparison) and a bench index.
constexpr const char* kLabV2 = R"sql(
  ALTER TABLE kneepoint.runs ADD COLUMN sync_mark text NOT NULL DEFAULT '';
  CREATE INDEX runs_by_bench ON kneepoint.runs(bench, bench_run_id);
  CREATE TABLE kneepoint.sample_blocks(
    run_uuid uuid NOT NULL REFERENCES kneepoint.runs(uuid),
    block bigint NOT NULL,
    sample_count bigint NOT NULL,
    first_t_s double precision NOT NULL, first_voltage_v double precision NOT NULL, first_current_a double precision NOT NULL,
    first_temperature_c double precision NOT NULL, first_step bigint NOT NULL,
    last_t_s double precision NOT NULL, last_voltage_v double precision NOT NULL, last_current_a double precision NOT NULL,
    last_temperature_c double precision NOT NULL, last_step bigint NOT NULL,
    net_mah double precision NOT NULL, discharged_mah double precision NOT NULL, charged_mah double precision NOT NULL,
    since_charge_mah double precision NOT NULL, has_charge bigint NOT NULL, net_wh double precision NOT NULL,
    discharged_wh double precision NOT NULL, voltage_time_vs double precision NOT NULL,
    min_voltage_v double precision NOT NULL, max_voltage_v double precision NOT NULL,
    min_current_a double precision NOT NULL, max_current_a double precision NOT NULL,
    min_temperature_c double precision NOT NULL, max_temperature_c double precision NOT NULL,
    PRIMARY KEY (run_uuid, block));
  CREATE TABLE kneepoint.dcir_points(
    run_uuid uuid NOT NULL REFERENCES kneepoint.runs(uuid),
    seq bigint NOT NULL,
    step_seq bigint NOT NULL,
    source text NOT NULL,
    t_edge_s double precision NOT NULL,
    u1_v double precision NOT NULL, i1_a double precision NOT NULL, t1_s double precision NOT NULL,
    u2_v double precision, i2_a double precision, t2_s double precision,
    resistance_ohm double precision,
    valid bigint NOT NULL,
    why_invalid text NOT NULL DEFAULT '',
    PRIMARY KEY (run_uuid, seq));
)sql";

constexpr const char* kMigrations[] = {kLabV1, kLabV2};
static_assert(std::size(kMigrations) == kLabSchemaVersion);

// Any fixed number: the advisory lock every migrating kneepoint takes.
constexpr const char* kMigrationLock = "SELECT pg_advisory_xact_lock(4923517001)";

}  // namespace

Result<int> LabSchemaVersion(pg::PgConn& conn) {
  KP_ASSIGN_OR_RETURN(auto exists, conn.Query("SELECT to_regclass('kneepoint.schema_version') IS NOT NULL"));
  if (exists.rows() == 0 || exists.View(0, 0) != "t") return 0;
  KP_ASSIGN_OR_RETURN(auto v, conn.Query("SELECT COALESCE(MAX(version), 0) FROM kneepoint.schema_version"));
  return static_cast<int>(v.Int(0, 0));
}

Status MigrateLab(pg::PgConn& conn, int target) {
  KP_ASSIGN_OR_RETURN(int now, LabSchemaVersion(conn));
  if (now > kLabSchemaVersion)
    return InvalidInput(fmt::format("{}: the lab schema is version {}, newer than this kneepoint understands ({}); use a newer kneepoint",
                                    pg::RedactUrl(conn.url()), now, kLabSchemaVersion));
  if (now >= target) return Status::Ok();
  for (int v = 1; v <= target; ++v) {
    KP_RETURN_IF_ERROR(conn.Exec("BEGIN"));
    Status st = conn.Exec(kMigrationLock);
    if (st.ok())
      st = conn.Exec("CREATE SCHEMA IF NOT EXISTS kneepoint; CREATE TABLE IF NOT EXISTS kneepoint.schema_version("
                     "version integer PRIMARY KEY, applied_at timestamptz NOT NULL DEFAULT now())");
    // Read again under the lock: another bench may have migrated meanwhile.
    Result<pg::PgResult> have = st.ok() ? conn.Query("SELECT COALESCE(MAX(version), 0) FROM kneepoint.schema_version")
                                        : Result<pg::PgResult>(st);
    if (!have.ok()) st = have.status();
    if (st.ok() && have->Int(0, 0) < v) {
      st = conn.Exec(kMigrations[v - 1]).WithContext(fmt::format("migrating the lab schema to version {}", v));
      if (st.ok()) {
        auto done = conn.Query("INSERT INTO kneepoint.schema_version(version) VALUES ($1)", {std::to_string(v)});
        if (!done.ok()) st = done.status();
      }
    }
    if (!st.ok()) {
      (void)conn.Exec("ROLLBACK");
      return st;
    }
    KP_RETURN_IF_ERROR(conn.Exec("COMMIT"));
  }
  return Status::Ok();
}

const std::vector<LabColumn>& LabRunColumns() {
  static const std::vector<LabColumn> cols = {
      {"t.uuid", "uuid", 't'},
      {"t.bench", "bench", 't'},
      {"t.id", "bench_run_id", 'i'},
      {"t.host", "host", 't'},
      {"t.operator", "operator", 't'},
      {"c.name", "cell", 't'},
      {"c.chemistry", "chemistry", 't'},
      {"c.rated_mah", "cell_rated_mah", 'r'},
      {"c.created_at", "cell_created_at", 't'},
      {"t.cell_serial", "cell_serial", 't'},
      {"t.cell_lot", "cell_lot", 't'},
      {"t.cell_part", "cell_part", 't'},
      {"t.procedure_name", "procedure_name", 't'},
      {"t.procedure_text", "procedure_text", 't'},
      {"t.rig", "rig", 't'},
      {"t.rig_text", "rig_text", 't'},
      {"t.rated_mah", "rated_mah", 'r'},
      {"t.started_at", "started_at", 't'},
      {"t.ended_at", "ended_at", 't'},
      {"t.outcome", "outcome", 't'},
      {"t.reason", "reason", 't'},
      {"t.heartbeat_at", "heartbeat_at", 'r'},
      {"t.progress_t_s", "progress_t_s", 'r'},
      {"t.net_mah", "net_mah", 'r'},
      {"t.net_wh", "net_wh", 'r'},
      {"t.resumes", "resumes", 'i'},
      {"t.delivered_mah", "delivered_mah", 'r'},
      {"t.delivered_wh", "delivered_wh", 'r'},
      {"t.charged_mah", "charged_mah", 'r'},
      {"t.thermometer_tolerance_c", "thermometer_tolerance_c", 'r'},
      {"t.sample_count", "sample_count", 'i'},
      {"t.software_version", "software_version", 't'},
      {"t.software_commit", "software_commit", 't'},
      {"t.verdict", "verdict", 't'},
      {"t.verdict_text", "verdict_text", 't'},
      {"t.verdict_pct_of_rated", "verdict_pct_of_rated", 'r'},
  };
  return cols;
}

const std::vector<LabTable>& LabTables() {
  static const std::vector<LabTable> tables = {
      {"samples", "seq", "seq", false,
       {{"seq", "seq", 'i'}, {"t_s", "t_s", 'r'}, {"voltage_v", "voltage_v", 'r'}, {"current_a", "current_a", 'r'},
        {"temperature_c", "temperature_c", 'r'}, {"step", "step", 'i'}}},
      {"sample_blocks", "block", "block", true,
       {{"block", "block", 'i'}, {"sample_count", "sample_count", 'i'},
        {"first_t_s", "first_t_s", 'r'}, {"first_voltage_v", "first_voltage_v", 'r'},
        {"first_current_a", "first_current_a", 'r'}, {"first_temperature_c", "first_temperature_c", 'r'},
        {"first_step", "first_step", 'i'},
        {"last_t_s", "last_t_s", 'r'}, {"last_voltage_v", "last_voltage_v", 'r'},
        {"last_current_a", "last_current_a", 'r'}, {"last_temperature_c", "last_temperature_c", 'r'},
        {"last_step", "last_step", 'i'},
        {"net_mah", "net_mah", 'r'}, {"discharged_mah", "discharged_mah", 'r'}, {"charged_mah", "charged_mah", 'r'},
        {"since_charge_mah", "since_charge_mah", 'r'}, {"has_charge", "has_charge", 'i'}, {"net_wh", "net_wh", 'r'},
        {"discharged_wh", "discharged_wh", 'r'}, {"voltage_time_vs", "voltage_time_vs", 'r'},
        {"min_voltage_v", "min_voltage_v", 'r'}, {"max_voltage_v", "max_voltage_v", 'r'},
        {"min_current_a", "min_current_a", 'r'}, {"max_current_a", "max_current_a", 'r'},
        {"min_temperature_c", "min_temperature_c", 'r'}, {"max_temperature_c", "max_temperature_c", 'r'}}},
      {"steps", "seq", "seq", true,
       {{"seq", "seq", 'i'}, {"idx", "idx", 'i'}, {"kind", "kind", 't'}, {"label", "label", 't'},
        {"started_s", "started_s", 'r'}, {"ended_s", "ended_s", 'r'}, {"end_reason", "end_reason", 't'},
        {"mode", "mode", 't'}, {"level", "level", 'r'}, {"loop_pass", "loop_pass", 'i'}, {"cycle", "cycle", 'i'},
        {"held_s", "held_s", 'r'}, {"record", "record", 't'}, {"charge_mah", "charge_mah", 'r'},
        {"energy_wh", "energy_wh", 'r'}, {"voltage_time_vs", "voltage_time_vs", 'r'}}},
      {"events", "id", "bench_event_id", false,
       {{"id", "bench_event_id", 'i'}, {"t_s", "t_s", 'r'}, {"kind", "kind", 't'}, {"message", "message", 't'},
        {"wall_at", "wall_at", 't'}}},
      {"dcir_points", "seq", "seq", false,
       {{"seq", "seq", 'i'}, {"step_seq", "step_seq", 'i'}, {"source", "source", 't'}, {"t_edge_s", "t_edge_s", 'r'},
        {"u1_v", "u1_v", 'r'}, {"i1_a", "i1_a", 'r'}, {"t1_s", "t1_s", 'r'}, {"u2_v", "u2_v", 'r'},
        {"i2_a", "i2_a", 'r'}, {"t2_s", "t2_s", 'r'}, {"resistance_ohm", "resistance_ohm", 'r'},
        {"valid", "valid", 'i'}, {"why_invalid", "why_invalid", 't'}}},
      {"instruments", "seq", "seq", false,
       {{"seq", "seq", 'i'}, {"name", "name", 't'}, {"roles", "roles", 't'}, {"address", "address", 't'},
        {"profile", "profile", 't'}, {"identity", "identity", 't'}, {"manufacturer", "manufacturer", 't'},
        {"model", "model", 't'}, {"serial", "serial", 't'}, {"firmware", "firmware", 't'},
        {"voltage_gain", "voltage_gain", 'r'}, {"voltage_offset_v", "voltage_offset_v", 'r'},
        {"current_gain", "current_gain", 'r'}, {"current_offset_a", "current_offset_a", 'r'},
        {"temperature_gain", "temperature_gain", 'r'}, {"temperature_offset_c", "temperature_offset_c", 'r'},
        {"calibrated_on", "calibrated_on", 't'}}},
  };
  return tables;
}

}  // namespace kp::lab
