// The lab's read-only web view (`kneepoint serve`): a JSON API over the lab
// database and one self-contained HTML page (inline style and script, no
// external files, scripts or fonts) that shows every running channel with
// its live voltage and the run list with verdicts. Only GET; nothing is ever
// written (the PostgreSQL sessions are read only).
//
// Routes (all answers JSON with "schema_version": 1 unless said otherwise):
//   /                               the page (text/html)
//   /api/runs?FILTERS               runs, newest first: bench, cell, serial, operator,
//                                   procedure (globs, * and ?), tag, outcome, verdict,
//                                   since, until (ISO dates), text (substring),
//                                   limit (default 500, at most 20000), offset
//   /api/live                       running runs with their latest sample
//   /api/runs/UUID                  one run's figures (the report's JSON, computed
//                                   by the bench's report code on a copy of the run)
//   /api/runs/UUID/samples?width=W  samples decimated to W buckets (min/max per bucket)
//   /api/runs/UUID/samples?since=S  samples with seq > S, in order (limit, default 5000)
#pragma once

#include <map>
#include <string>

namespace kp::lab {

class LabWeb {
 public:
  struct Response {
    int status = 200;
    std::string content_type = "application/json";
    std::string body;
  };
  using Params = std::multimap<std::string, std::string>;
  explicit LabWeb(std::string url) : url_(std::move(url)) {}
  // Answers GET `path` with query `params`. Thread-safe (one PostgreSQL
  // connection per calling thread).
  Response Get(const std::string& path, const Params& params) const;
  static const std::string& Page();

 private:
  Response Runs(const Params& p) const;
  Response Live() const;
  Response Figures(const std::string& uuid) const;
  Response Samples(const std::string& uuid, const Params& p) const;
  std::string url_;
};

}  // namespace kp::lab
