// A run's samples as files that open anywhere: CSV per RFC 4180 (or the
// semicolon / decimal-comma form spreadsheets in those locales expect) and
// an .xlsx workbook (a summary sheet and the samples), streamed from the
// database one sample at a time. Every row carries, beside the stored
// channels, the UTC wall-clock time, the step number, kind and cycle of the
// step instance that owns the sample, and the cumulative net charge (Ah) and
// energy (Wh) by the trapezoid rule (rig/sample_summary.h, the integrals the
// store keeps per block).
#pragma once

#include <cstdint>
#include <ostream>
#include <string>
#include <string_view>
#include <vector>

#include "rig/store.h"
#include "ui/report/run_report.h"

namespace kp {

struct CsvStyle {
  char separator = ',';
  char decimal = '.';
};
// Semicolon-separated, decimal comma (spreadsheets set to e.g. German or French).
inline constexpr CsvStyle kCsvDecimalComma{';', ','};

// One field per RFC 4180: quoted (inner quotes doubled) when it holds the
// separator, a quote, CR or LF, or begins or ends with a space.
std::string CsvField(std::string_view text, char separator = ',');
// A number in shortest round-trip form with the style's decimal mark.
std::string CsvNumber(double v, const CsvStyle& style);

// The columns every sample export writes, in order, with their units in the
// names. The first seven are the columns of earlier versions, unchanged.
const std::vector<std::string>& SampleExportColumns();

// "2026-03-14T09:30:00.250Z": `started_at` (ISO 8601 UTC, whole seconds, as
// the store writes it) plus `t_s`. Empty when `started_at` cannot be read.
std::string WallTimeAt(const std::string& started_at, double t_s);

// Header plus one CRLF-terminated row per sample.
Status WriteSamplesCsv(Store& store, const RunRow& run, std::ostream& out, const CsvStyle& style = {});

// An .xlsx workbook: sheet "summary" (the run record, equipment and the
// report's headline figures) and sheet "samples" (the CSV columns; more
// sheets "samples 2", ... when a run has more rows than a sheet holds).
Status WriteRunXlsx(Store& store, const RunReport& report, const std::string& path);

}  // namespace kp
