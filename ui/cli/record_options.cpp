#include "ui/cli/record_options.h"

#include <algorithm>
#include <cstdlib>

#include <fmt/format.h>

namespace kp::cli {
namespace {

std::string Trim(const std::string& s) {
  size_t b = s.find_first_not_of(" \t");
  if (b == std::string::npos) return "";
  return s.substr(b, s.find_last_not_of(" \t") - b + 1);
}

Status CheckText(const std::string& what, const std::string& v) {
  for (unsigned char c : v)
    if (c < 0x20 && c != '\t') return InvalidInput(fmt::format("{}: control characters are not allowed", what));
  if (v.size() > 1000) return InvalidInput(fmt::format("{}: longer than 1000 characters", what));
  return Status::Ok();
}

}  // namespace

void AddRecordOptions(CLI::App* c, RecordOptions& o) {
  c->add_option("--bench", o.bench, "Bench name stored with the run (default: the rig file's [bench] name, 'sim' for the simulator)");
  c->add_option("--operator", o.operator_name, "Who runs the test (default: $KNEEPOINT_OPERATOR, else the login name)");
  c->add_option("--serial", o.serial, "The cell's serial number");
  c->add_option("--lot", o.lot, "The cell's lot (batch) number");
  c->add_option("--part", o.part, "The cell's manufacturer part number");
  c->add_option("--tag", o.tags, "A tag for finding the run later (repeat, or a comma list: --tag incoming,batch-7)");
  c->add_option("--note", o.note, "A free-text note stored with the run (add more later with `kneepoint note`)");
}

Status FillRecord(const RecordOptions& o, NewRun& r) {
  r.bench = Trim(o.bench);
  r.operator_name = Trim(o.operator_name);
  if (r.operator_name.empty()) {
    for (const char* var : {"KNEEPOINT_OPERATOR", "USER", "LOGNAME"}) {
      const char* v = std::getenv(var);
      if (v != nullptr && *v != '\0') {
        r.operator_name = v;
        break;
      }
    }
  }
  r.cell_serial = Trim(o.serial);
  r.cell_lot = Trim(o.lot);
  r.cell_part = Trim(o.part);
  r.note = o.note;
  for (const auto& [what, v] : {std::pair<const char*, const std::string*>{"--bench", &r.bench}, {"--operator", &r.operator_name},
                                {"--serial", &r.cell_serial}, {"--lot", &r.cell_lot}, {"--part", &r.cell_part}})
    KP_RETURN_IF_ERROR(CheckText(what, *v));
  if (r.note.size() > 100000) return InvalidInput("--note: longer than 100000 characters");
  r.tags.clear();
  for (const std::string& list : o.tags) {
    size_t b = 0;
    for (;;) {
      size_t e = list.find(',', b);
      std::string tag = Trim(list.substr(b, e == std::string::npos ? std::string::npos : e - b));
      if (tag.empty()) return InvalidInput(fmt::format("--tag '{}': an empty tag", list));
      KP_RETURN_IF_ERROR(CheckText("--tag", tag));
      if (std::find(r.tags.begin(), r.tags.end(), tag) == r.tags.end()) r.tags.push_back(tag);
      if (e == std::string::npos) break;
      b = e + 1;
    }
  }
  return Status::Ok();
}

}  // namespace kp::cli
