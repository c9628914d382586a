#include "procedures/procedure_parser.h"

#include <fmt/format.h>

#include <algorithm>
#include <functional>
#include <cctype>
#include <charconv>
#include <cmath>
#include <cstdlib>
#include <map>
#include <optional>
#include <set>

#include "drivers/text_limits.h"
#include "drivers/spelling.h"
#include "procedures/units.h"

namespace kp {
namespace {

constexpr double kMaxNumber = 1e9;  // largest number written in a procedure, any unit

// ---------------------------------------------------------------- lexer ----

struct Tok {
  enum Kind { kWord, kNumber, kString, kOp, kSlash, kEnd } kind = kEnd;
  std::string text;  // word, string contents, operator, or the number as written
  double num = 0.0;
  std::string unit;  // for kNumber: the unit suffix as written (may be empty)
  int col = 0;
};

// Thrown inside this file only: ends the current line with one diagnostic.
struct LineError {
  int col;
  std::string message;
};
// Ends the current line without a diagnostic: what is wrong with it follows
// from an earlier rejected line (a cell line without a usable rated capacity),
// which already has its one error.
struct LineSkipped {};

bool IsWordStart(unsigned char c) { return std::isalpha(c) != 0 || c == '_'; }
bool IsWordChar(unsigned char c) { return std::isalnum(c) != 0 || c == '_' || c == '-' || c == '.'; }

std::vector<Tok> Lex(std::string_view line) {
  std::vector<Tok> out;
  size_t i = 0;
  const size_t n = line.size();
  while (i < n) {
    unsigned char c = static_cast<unsigned char>(line[i]);
    int col = static_cast<int>(i) + 1;
    if (c == ' ' || c == '\t' || c == '\r') {
      ++i;
      continue;
    }
    if (c == '#') break;
    Tok t;
    t.col = col;
    if (IsWordStart(c)) {
      size_t j = i;
      while (j < n && IsWordChar(static_cast<unsigned char>(line[j]))) ++j;
      t.kind = Tok::kWord;
      t.text = std::string(line.substr(i, j - i));
      i = j;
    } else if (std::isdigit(c) != 0 ||
               ((c == '-' || c == '.') && i + 1 < n && std::isdigit(static_cast<unsigned char>(line[i + 1])) != 0)) {
      // The one quantity scanner (procedures/units.h): unit attached or after a
      // space, compound and h:mm:ss durations.
      ScannedQuantity q = ScanQuantity(line, i);
      if (!q.error.empty()) throw LineError{static_cast<int>(q.error_pos) + 1, q.error};
      t.kind = Tok::kNumber;
      t.text = q.text;
      t.num = q.number;
      t.unit = q.unit;
      // No setting of a bench comes near 1e9 in any unit (1e9 s is 31 years).
      if (!std::isfinite(t.num) || std::abs(t.num) > kMaxNumber)
        throw LineError{col, fmt::format("number '{}' is out of range (at most {:g})", q.text, kMaxNumber)};
      i = q.end;
    } else if (c == '"') {
      size_t j = line.find('"', i + 1);
      if (j == std::string_view::npos) throw LineError{col, "unterminated string: add the closing '\"'"};
      t.kind = Tok::kString;
      t.text = std::string(line.substr(i + 1, j - i - 1));
      i = j + 1;
    } else if (c == '<' || c == '>' || c == '=') {
      t.kind = Tok::kOp;
      if ((c == '<' || c == '>') && i + 1 < n && line[i + 1] == '=') {
        t.text = std::string(line.substr(i, 2));
        i += 2;
      } else {
        t.text = std::string(1, static_cast<char>(c));
        ++i;
      }
    } else if (c == '/') {
      t.kind = Tok::kSlash;
      t.text = "/";
      ++i;
    } else {
      std::string shown = c >= 0x20 && c < 0x7f ? std::string(1, static_cast<char>(c)) : fmt::format("\\x{:02x}", c);
      throw LineError{col, fmt::format("unexpected character '{}'", shown)};
    }
    out.push_back(std::move(t));
  }
  Tok end;
  end.kind = Tok::kEnd;
  end.col = static_cast<int>(std::min(n, line.find('#'))) + 1;
  out.push_back(end);
  return out;
}

// --------------------------------------------------------------- parser ----

struct Block {
  enum Kind { kRepeat, kProfile } kind;
  int line = 0;
  int col = 0;
  Loop loop;         // kRepeat
  std::string name;  // kProfile
  std::vector<Segment> segments;
  bool had_error = false;  // a line inside (or the opening line) was rejected: no follow-on errors
};

// The words of the language, for "did you mean ...?".
const std::initializer_list<const char*> kStatements = {"name",  "cell",  "safety", "sample", "rest",   "discharge",
                                                        "pulse", "duty",  "phase",  "play",   "dcir",   "charge",
                                                        "repeat", "end",  "chamber", "soak"};
const std::initializer_list<const char*> kConditions = {"voltage", "current", "time", "charge", "energy", "temp"};
const std::initializer_list<const char*> kStepOptions = {"every", "log-change", "log-gap", "until"};
const std::initializer_list<const char*> kCellFields = {"rated", "nominal", "max", "cutoff", "max-temp"};
const std::initializer_list<const char*> kSafetyKeys = {"max-temp",  "min-voltage", "max-voltage", "max-current", "max-time",
                                                        "max-charge", "when-hot",   "resume-temp", "hard-temp",
                                                        "chamber-min", "chamber-max"};
const std::initializer_list<const char*> kSoakOptions = {"within", "for", "max", "every", "log-change", "log-gap"};

// Where a step's level was written, for checks made after the whole file.
struct StepSite {
  int level_col = 1;
  int keyword_col = 1;
};

class Parser {
 public:
  Parser(const std::string& name, const RigLimits& rig) : rig_(rig) { plan_.name = name; }

  // Reads only the duty blocks: a file without a cell line or steps is fine.
  void PatternsOnly() { patterns_only_ = true; }
  std::vector<DutyPattern> Patterns() const {
    std::vector<DutyPattern> out;
    for (const auto& [name, phases] : profiles_) out.push_back(DutyPattern{name, phases, profiles_line_.at(name)});
    std::sort(out.begin(), out.end(), [](const DutyPattern& a, const DutyPattern& b) { return a.line < b.line; });
    return out;
  }

  ParseOutput Run(std::string_view text) {
    if (text.size() > kMaxTextFileBytes) {
      Error(1, 1, fmt::format("the procedure is {} bytes; the limit is {} bytes (is this the right file?)", text.size(),
                              kMaxTextFileBytes));
      return std::move(out_);
    }
    plan_.source_text = std::string(text);
    int line_no = 0;
    size_t pos = 0;
    while (pos <= text.size()) {
      size_t nl = text.find('\n', pos);
      std::string_view line = text.substr(pos, nl == std::string_view::npos ? std::string_view::npos : nl - pos);
      if (nl == std::string_view::npos && line.empty() && line_no > 0) break;  // text ends with a newline
      ++line_no;
      line_ = line_no;
      line_text_ = line;
      if (line.size() > kMaxTextLineBytes) {
        Error(line_no, static_cast<int>(kMaxTextLineBytes) + 1,
              fmt::format("line is {} bytes long; the limit is {} bytes", line.size(), kMaxTextLineBytes));
        if (nl == std::string_view::npos) break;
        pos = nl + 1;
        continue;
      }
      try {
        toks_ = Lex(line);
        at_ = 0;
        if (Peek().kind != Tok::kEnd) Statement();
      } catch (const LineError& e) {
        Error(line_no, e.col, e.message);
        for (Block& b : blocks_) b.had_error = true;
      } catch (const LineSkipped&) {
        for (Block& b : blocks_) b.had_error = true;
      }
      if (nl == std::string_view::npos) break;
      pos = nl + 1;
    }
    Finish(line_no);
    std::stable_sort(out_.errors.begin(), out_.errors.end(),
                     [](const Diagnostic& a, const Diagnostic& b) { return a.line != b.line ? a.line < b.line : a.col < b.col; });
    out_.plan = std::move(plan_);
    return std::move(out_);
  }

 private:
  void Error(int line, int col, std::string message) { out_.errors.push_back({line, col, std::move(message)}); }
  void Warn(int line, int col, std::string message) {
    plan_.warnings.push_back(fmt::format("line {}:{}: {}", line, col, message));
    out_.warnings.push_back({line, col, std::move(message)});
  }

  // "unknown condition 'votlage': did you mean 'voltage'?", or the usage when nothing is close.
  static std::string Unknown(const char* kind, const std::string& word, std::initializer_list<const char*> known,
                             const std::string& usage) {
    std::optional<std::string> close = ClosestWord(word, known);
    if (close) return fmt::format("unknown {} '{}': did you mean '{}'?", kind, word, *close);
    return fmt::format("unknown {} '{}': {}", kind, word, usage);
  }

  // ---- token helpers ----
  const Tok& Peek() const { return toks_[at_]; }
  const Tok& Next() {
    const Tok& t = toks_[at_];
    if (t.kind != Tok::kEnd) ++at_;
    return t;
  }
  bool PeekWord(const char* w) const { return Peek().kind == Tok::kWord && Peek().text == w; }
  [[noreturn]] void Fail(const Tok& t, std::string message) const { throw LineError{t.col, std::move(message)}; }
  static std::string Describe(const Tok& t) {
    switch (t.kind) {
      case Tok::kEnd:
        return "end of line";
      case Tok::kString:
        return "\"" + t.text + "\"";
      default:
        return "'" + t.text + "'";
    }
  }
  const Tok& ExpectWord(const char* what) {
    const Tok& t = Next();
    if (t.kind != Tok::kWord) Fail(t, fmt::format("expected {}, found {}", what, Describe(t)));
    return t;
  }
  void ExpectOp(const char* op) {
    const Tok& t = Next();
    if (t.kind != Tok::kOp || t.text != op) Fail(t, fmt::format("expected '{}', found {}", op, Describe(t)));
  }
  void ExpectEnd() {
    const Tok& t = Peek();
    if (t.kind != Tok::kEnd) Fail(t, fmt::format("unexpected {} at the end of the statement", Describe(t)));
  }
  int ExpectCount(const char* what) {
    const Tok& t = Next();
    if (t.kind != Tok::kNumber || !t.unit.empty() || t.num != std::floor(t.num) || t.num < 1 ||
        t.num > static_cast<double>(kMaxRepeatPasses))
      Fail(t, fmt::format("expected {} (a whole number from 1 to {}), found {}", what, kMaxRepeatPasses, Describe(t)));
    return static_cast<int>(t.num);
  }

  // A quantity of dimension `want`, converted to the Plan's base unit. C-rates
  // turn into amps (current) and percentages into mAh (charge) via the cell.
  double Quantity(Dimension want, const char* what) {
    const Tok& t = Next();
    if (t.kind != Tok::kNumber) Fail(t, fmt::format("expected {} ({}), found {}", what, UnitsOf(want), Describe(t)));
    return Convert(t, want, what);
  }
  double Convert(const Tok& t, Dimension want, const char* what) {
    if (t.unit.empty()) Fail(t, fmt::format("{} ({} takes {})", BareNumberHint(t.text, want), what, UnitsOf(want)));
    UnitLookup u = LookUpUnit(t.unit);
    bool needs_cell = u.info && ((u.info->dimension == Dimension::kCRate && want == Dimension::kCurrent) ||
                                 (u.info->dimension == Dimension::kPercent && want == Dimension::kCharge));
    if (needs_cell && !cell_seen_) {
      if (u.info->dimension == Dimension::kCRate)
        Fail(t, fmt::format("C-rate '{}' needs the rated capacity: put the 'cell' line first", t.text));
      Fail(t, fmt::format("'{}' of rated capacity needs the 'cell' line first", t.text));
    }
    if (needs_cell && !(plan_.cell.rated_mah > 0)) {
      if (cell_rejected_) throw LineSkipped{};  // the cell line has its error
      Fail(t, fmt::format("'{}' needs the rated capacity, which is not known here: write it in mAh or Ah", t.text));
    }
    ScannedQuantity q;
    q.number = t.num;
    q.unit = t.unit;
    q.text = t.text;
    QuantityContext ctx;
    if (plan_.cell.rated_mah > 0) ctx.rated_mah = plan_.cell.rated_mah;
    ConvertedQuantity c = ConvertQuantity(q, want, what, ctx);
    if (!c.value) Fail(t, c.error);
    return *c.value;
  }
  double Positive(double v, const Tok& at, const char* what) {
    if (!(v > 0.0)) Fail(at, fmt::format("{} must be greater than zero", what));
    return v;
  }

  // A load level: current (or C-rate), power or resistance — the unit decides.
  struct Level {
    LoadMode mode;
    double value;
    int col;
  };
  Level LoadLevel(const char* what, bool allow_zero) {
    const Tok& t = Next();
    if (t.kind != Tok::kNumber)
      Fail(t, fmt::format("expected {} (a current like 500mA or 0.2C, a power like 2W, or a resistance like 3.9Ohm), found {}",
                          what, Describe(t)));
    if (t.unit.empty())
      Fail(t, fmt::format("{} ({} is a current, power or resistance: A, W, Ohm)", BareNumberHint(t.text, Dimension::kCurrent),
                          what));
    UnitLookup lu = LookUpUnit(t.unit);
    if (!lu.info && !lu.error.empty()) Fail(t, lu.error);
    if (!lu.info) {
      std::string hint = DidYouMean(t.unit, {"A", "mA", "uA", "nA", "C", "It", "W", "mW", "kW", "Ohm", "mOhm", "kOhm"});
      Fail(t, fmt::format("unknown unit '{}' in '{}'{}", t.unit, t.text, hint));
    }
    std::optional<UnitInfo> u = lu.info;
    Level l{LoadMode::kCurrent, 0.0, t.col};
    switch (u->dimension) {
      case Dimension::kCurrent:
      case Dimension::kCRate:
        l.value = Convert(t, Dimension::kCurrent, what);
        break;
      case Dimension::kPower:
        l = {LoadMode::kPower, t.num * u->scale, t.col};
        break;
      case Dimension::kResistance:
        l = {LoadMode::kResistance, t.num * u->scale, t.col};
        break;
      default:
        Fail(t, fmt::format("{} must be a current, power or resistance, but '{}' is a {}", what, t.text,
                            DimensionName(u->dimension)));
    }
    if (l.value < 0.0) Fail(t, fmt::format("{} cannot be negative (discharge levels are positive)", what));
    if (l.value == 0.0 && (!allow_zero || l.mode != LoadMode::kCurrent))
      Fail(t, fmt::format("{} must be greater than zero", what));
    return l;
  }
  // LEVEL/DURATION, as in "2A/10s".
  Segment SegmentSpec(const char* what) {
    Level l = LoadLevel(what, true);
    const Tok& slash = Next();
    if (slash.kind != Tok::kSlash)
      Fail(slash, fmt::format("expected '/' and a duration after the level (as in 2A/10s), found {}", Describe(slash)));
    const Tok& d = Peek();
    double dur = Positive(Quantity(Dimension::kTime, "segment duration"), d, "a segment's duration");
    Segment g;
    g.mode = l.mode;
    g.level = l.value;
    g.duration_s = g.real_duration_s = dur;
    return g;
  }

  // key=value pairs until end of line (or a word in `stop`); calls `fn(key tok)`.
  template <typename Fn>
  void Options(Fn fn) {
    while (Peek().kind != Tok::kEnd) {
      const Tok& key = ExpectWord("an option like key=value");
      ExpectOp("=");
      fn(key);
    }
  }

  // until COND [or COND]...
  void Conditions(EndConditions& e) {
    do {
      const Tok& m = ExpectWord("a condition such as voltage<=2.75V");
      const Tok& op = Next();
      if (op.kind != Tok::kOp || (op.text != "<=" && op.text != ">="))
        Fail(op, fmt::format("expected '<=' or '>=' after '{}', found {}", m.text, Describe(op)));
      bool le = op.text == "<=";
      const Tok& vt = Peek();
      auto only = [&](bool ok, const char* form) {
        if (!ok) Fail(op, fmt::format("'{}' takes only '{}'", m.text, form));
      };
      if (m.text == "voltage") {
        double v = Quantity(Dimension::kVoltage, "a voltage limit");
        (le ? e.voltage_below_v : e.voltage_above_v) = v;
      } else if (m.text == "current") {
        only(le, "<=");
        e.current_below_a = Quantity(Dimension::kCurrent, "a current limit");
      } else if (m.text == "time") {
        only(!le, ">=");
        e.time_s = Positive(Quantity(Dimension::kTime, "a duration"), vt, "a duration");
      } else if (m.text == "charge") {
        only(!le, ">=");
        e.charge_mah = Positive(Quantity(Dimension::kCharge, "a charge"), vt, "a charge");
      } else if (m.text == "energy") {
        only(!le, ">=");
        e.energy_wh = Positive(Quantity(Dimension::kEnergy, "an energy"), vt, "an energy");
      } else if (m.text == "temp") {
        only(!le, ">=");
        e.temperature_above_c = Quantity(Dimension::kTemperature, "a temperature");
      } else {
        Fail(m, Unknown("condition", m.text, kConditions, "use voltage, current, time, charge, energy or temp"));
      }
    } while (PeekWord("or") && (Next(), true));
  }

  // Trailing per-step parts: "until ..." and options every=, log-change=, log-gap=.
  // `extra`, when given, reads the step's own key=value options (the '=' read);
  // it returns false for keys that are not its own.
  void StepTail(Step& s, bool allow_until, const std::function<bool(const Tok&)>& extra = nullptr) {
    while (Peek().kind != Tok::kEnd) {
      if (PeekWord("until")) {
        const Tok& u = Next();
        if (!allow_until) Fail(u, "this step ends by itself and takes no 'until'");
        Conditions(s.end);
        continue;
      }
      const Tok& key = ExpectWord("'until' or an option (every=, log-change=, log-gap=)");
      bool known_option = key.text == "every" || key.text == "log-change" || key.text == "log-gap";
      if (!known_option && (Peek().kind != Tok::kOp || Peek().text != "="))
        Fail(key, Unknown("word", key.text, kStepOptions, "expected 'until' or an option (every=, log-change=, log-gap=)"));
      ExpectOp("=");
      const Tok& vt = Peek();
      if (key.text == "every") {
        s.sample_period_s = Positive(Quantity(Dimension::kTime, "the sample period"), vt, "the sample period");
      } else if (key.text == "log-change") {
        s.log_change_v = Positive(Quantity(Dimension::kVoltage, "the logging threshold"), vt, "the logging threshold");
      } else if (key.text == "log-gap") {
        s.log_max_gap_s = Positive(Quantity(Dimension::kTime, "the longest gap between logged samples"), vt, "log-gap");
      } else if (extra && extra(key)) {
      } else {
        Fail(key, Unknown("step option", key.text, kStepOptions, "use every=, log-change= or log-gap="));
      }
    }
  }

  void AddStep(Step s, StepSite site) {
    if (s.kind != StepKind::kResistanceTest && !IsChamberKind(s.kind) && !s.end.any())
      Fail(toks_.back(), fmt::format("the {} needs an end: add 'until' with a condition such as time>=1h", StepKindName(s.kind)));
    if (s.kind == StepKind::kCharge && !s.end.current_below_a && !s.end.time_s)
      Fail(toks_.back(), "a charge step needs 'until current<=...' (taper) or 'until time>=...'");
    s.source_line = line_;
    if (!s.log_change_v && default_log_change_v_) s.log_change_v = default_log_change_v_;
    if (s.label.empty()) s.label = Label(s);
    plan_.steps.push_back(std::move(s));
    sites_.push_back(site);
    // Until-loops whose body is empty so far start here.
    for (Block& b : blocks_)
      if (b.kind == Block::kRepeat && b.loop.first_step < 0) b.loop.first_step = static_cast<int>(plan_.steps.size()) - 1;
  }

  static std::string LevelText(LoadMode m, double v) {
    switch (m) {
      case LoadMode::kCurrent:
        return FormatQuantity(v, Dimension::kCurrent);
      case LoadMode::kPower:
        return FormatQuantity(v, Dimension::kPower);
      case LoadMode::kResistance:
        return FormatQuantity(v, Dimension::kResistance);
    }
    return "?";
  }
  std::string Label(const Step& s) const {
    std::string text(line_text_);
    size_t hash = text.find('#');
    if (hash != std::string::npos) text.resize(hash);
    while (!text.empty() && std::isspace(static_cast<unsigned char>(text.back()))) text.pop_back();
    size_t first = text.find_first_not_of(" \t");
    (void)s;
    return first == std::string::npos ? text : text.substr(first);
  }

  // ---- statements ----
  void Statement() {
    const Tok& kw =
        ExpectWord("a statement (cell, safety, rest, discharge, pulse, duty, play, dcir, charge, repeat, end...)");
    std::string k = kw.text;
    // The older names of the duty block and its step, still read (stored runs
    // are rebuilt from their text): one warning each, then as the new words.
    if (k == "profile" || k == "cycle") {
      const char* now = k == "profile" ? "duty" : "play";
      Warn(line_, kw.col, fmt::format("'{}' is the older name of '{}' (still read): write '{}'", k, now, now));
      k = now;
    }
    bool in_duty = !blocks_.empty() && blocks_.back().kind == Block::kProfile;
    if (in_duty && k != "phase" && k != "end")
      Fail(kw, fmt::format("inside 'duty' only 'phase' lines and 'end' are allowed, found '{}'", kw.text));
    if (k == "name") {
      const Tok& t = Next();
      if (t.kind != Tok::kString || t.text.empty())
        Fail(t, "expected the procedure name in quotes, as in name \"capacity check\"");
      plan_.name = t.text;
      ExpectEnd();
    } else if (k == "cell") {
      try {
        CellLine(kw);
      } catch (...) {
        header_rejected_ = cell_rejected_ = true;
        throw;
      }
    } else if (k == "safety") {
      try {
        SafetyLine();
      } catch (...) {
        header_rejected_ = true;
        throw;
      }
    } else if (k == "sample") {
      Options([&](const Tok& key) {
        const Tok& vt = Peek();
        if (key.text == "every")
          default_period_s_ = Positive(Quantity(Dimension::kTime, "the sample period"), vt, "the sample period");
        else if (key.text == "log-change")
          default_log_change_v_ = Positive(Quantity(Dimension::kVoltage, "the logging threshold"), vt, "log-change");
        else
          Fail(key, Unknown("sampling option", key.text, {"every", "log-change"}, "use every= or log-change="));
      });
    } else if (k == "duty") {
      // Opened before its line is checked, so that a mistake here does not
      // turn its phases and its 'end' into errors of their own.
      blocks_.push_back(Block{Block::kProfile, line_, kw.col, {}, "", {}});
      const Tok& n = ExpectWord("the duty pattern's name");
      blocks_.back().name = n.text;
      ExpectEnd();
      if (profiles_.count(n.text))
        Fail(n, fmt::format("duty '{}' is already defined on line {}", n.text, profiles_line_[n.text]));
    } else if (k == "phase") {
      if (!in_duty) Fail(kw, "'phase' belongs inside a 'duty' ... 'end' block");
      const Tok& n = ExpectWord("the phase's name");
      Segment g = SegmentSpec("the phase level");
      g.name = n.text;
      ExpectEnd();
      blocks_.back().segments.push_back(g);
    } else if (k == "repeat") {
      blocks_.push_back(Block{Block::kRepeat, line_, kw.col, {}, "", {}});
      Block& b = blocks_.back();
      b.loop.source_line = line_;
      b.loop.first_step = -1;
      if (PeekWord("until")) {
        Next();
        Conditions(b.loop.until);
      } else {
        b.loop.count = ExpectCount("a repeat count or 'until'");
      }
      ExpectEnd();
    } else if (k == "end") {
      ExpectEnd();
      if (blocks_.empty()) Fail(kw, "'end' without an open 'repeat' or 'duty'");
      Block b = std::move(blocks_.back());
      blocks_.pop_back();
      if (b.kind == Block::kProfile) {
        if (b.had_error) {
          if (!b.name.empty() && !profiles_.count(b.name)) broken_profiles_.insert(b.name);
          return;
        }
        if (b.segments.empty()) Fail(kw, fmt::format("duty '{}' has no phases", b.name));
        profiles_[b.name] = b.segments;
        profiles_line_[b.name] = b.line;
      } else {
        if (b.loop.first_step < 0) {
          if (b.had_error) return;
          Fail(kw, "this 'repeat' has no steps");
        }
        b.loop.last_step = static_cast<int>(plan_.steps.size()) - 1;
        // One limit for all repeats, nested counts multiplied.
        if (int64_t passes = NestedPasses(plan_.loops, b.loop); passes > kMaxRepeatPasses)
          Error(b.line, b.col,
                fmt::format("this repeat and those inside it make more than {} passes (nested counts multiply); at most {} in all",
                            kMaxRepeatPasses, kMaxRepeatPasses));
        // Outer loops first: an outer loop opened earlier is closed later, so
        // insert before loops that it contains.
        auto pos = std::find_if(plan_.loops.begin(), plan_.loops.end(), [&](const Loop& l) {
          return l.first_step >= b.loop.first_step && l.last_step <= b.loop.last_step;
        });
        plan_.loops.insert(pos, b.loop);
      }
    } else {
      StepStatement(kw, k);
    }
  }

  void CellLine(const Tok& kw) {
    if (cell_line_ > 0) Fail(kw, fmt::format("a second 'cell' line (the first is on line {})", cell_line_));
    // Counted as seen even if the rest of the line is wrong: one error, not one per step.
    cell_seen_ = true;
    cell_line_ = line_;
    const Tok& chem = ExpectWord("the chemistry (li-ion, lifepo4, nimh, alkaline...)");
    CellSpec& c = plan_.cell;
    c.chemistry = chem.text;
    bool rated = false, cutoff = false;
    Options([&](const Tok& key) {
      const Tok& vt = Peek();
      if (key.text == "rated") {
        c.rated_mah = Positive(Quantity(Dimension::kCharge, "the rated capacity"), vt, "the rated capacity");
        rated = true;
      } else if (key.text == "nominal") {
        c.nominal_v = Positive(Quantity(Dimension::kVoltage, "the nominal voltage"), vt, "the nominal voltage");
      } else if (key.text == "max") {
        c.max_v = Positive(Quantity(Dimension::kVoltage, "the maximum voltage"), vt, "the maximum voltage");
      } else if (key.text == "cutoff") {
        c.cutoff_v = Positive(Quantity(Dimension::kVoltage, "the cutoff voltage"), vt, "the cutoff voltage");
        cutoff = true;
      } else if (key.text == "max-temp") {
        c.max_temp_c = Quantity(Dimension::kTemperature, "the maximum temperature");
      } else {
        Fail(key, Unknown("cell field", key.text, kCellFields, "use rated=, nominal=, max=, cutoff=, max-temp="));
      }
    });
    if (!rated) Fail(toks_.back(), "the cell needs rated= (its rated capacity, e.g. rated=2500mAh)");
    if (!cutoff) Fail(toks_.back(), "the cell needs cutoff= (its end-of-discharge voltage, e.g. cutoff=2.75V)");
    if (c.max_v > 0 && c.max_v <= c.cutoff_v) Fail(kw, "the cell's max= must be above its cutoff=");
    if (c.nominal_v == 0) c.nominal_v = c.max_v > 0 ? 0.5 * (c.max_v + c.cutoff_v) : c.cutoff_v;
  }

  void SafetyLine() {
    SafetyLimits& l = plan_.limits;
    Options([&](const Tok& key) {
      const Tok& vt = Peek();
      const std::string& k = key.text;
      if (k == "max-temp")
        l.max_temp_c = Quantity(Dimension::kTemperature, "max-temp"), set_.max_temp = true;
      else if (k == "min-voltage")
        l.min_voltage_v = Quantity(Dimension::kVoltage, "min-voltage"), set_.min_v = true;
      else if (k == "max-voltage")
        l.max_voltage_v = Positive(Quantity(Dimension::kVoltage, "max-voltage"), vt, "max-voltage"), set_.max_v = true;
      else if (k == "max-current")
        l.max_current_a = Positive(Quantity(Dimension::kCurrent, "max-current"), vt, "max-current"), set_.max_i = true;
      else if (k == "max-time")
        l.max_total_s = Positive(Quantity(Dimension::kTime, "max-time"), vt, "max-time"), set_.max_t = true;
      else if (k == "max-charge")
        l.max_charge_mah = Positive(Quantity(Dimension::kCharge, "max-charge"), vt, "max-charge"), set_.max_q = true;
      else if (k == "resume-temp")
        l.resume_temp_c = Quantity(Dimension::kTemperature, "resume-temp"), set_.resume = true, resume_col_ = vt.col;
      else if (k == "hard-temp")
        l.hard_temp_c = Quantity(Dimension::kTemperature, "hard-temp"), set_.hard = true;
      else if (k == "chamber-min")
        l.chamber_min_c = Quantity(Dimension::kTemperature, "chamber-min"), chamber_limit_line_ = line_, chamber_limit_col_ = vt.col;
      else if (k == "chamber-max")
        l.chamber_max_c = Quantity(Dimension::kTemperature, "chamber-max"), chamber_limit_line_ = line_, chamber_limit_col_ = vt.col;
      else if (k == "when-hot") {
        const Tok& a = ExpectWord("'abort' or 'pause'");
        if (a.text == "abort")
          l.over_temp_action = OverTempAction::kAbort;
        else if (a.text == "pause")
          l.over_temp_action = OverTempAction::kPause, pause_line_ = line_, pause_col_ = a.col;
        else
          Fail(a, fmt::format("when-hot takes 'abort' or 'pause', not '{}'", a.text));
      } else {
        Fail(key, Unknown("safety limit", k, kSafetyKeys,
                          "use max-temp=, min-voltage=, max-voltage=, max-current=, max-time=, max-charge=, when-hot=, "
                          "resume-temp=, hard-temp=, chamber-min=, chamber-max="));
      }
    });
  }

  void StepStatement(const Tok& kw, const std::string& k) {
    static const char* const kSteps[] = {"rest", "discharge", "pulse", "play", "dcir", "charge", "chamber", "soak"};
    if (std::none_of(std::begin(kSteps), std::end(kSteps), [&](const char* w) { return k == w; }))
      Fail(kw, Unknown("statement", k, kStatements,
                       "use cell, safety, sample, rest, discharge, pulse, duty/phase, play, dcir, charge, chamber, soak, repeat or end"));
    if (!cell_seen_) {
      // Once, and not at all when an earlier line (a misspelt 'cell') has its error.
      if (!out_.errors.empty() || no_cell_reported_) throw LineSkipped{};
      no_cell_reported_ = true;
      Fail(kw, "steps need the 'cell' line first (rated capacity and cutoff)");
    }
    Step s;
    s.sample_period_s = default_period_s_;
    StepSite site{kw.col, kw.col};
    if (k == "rest") {
      s.kind = StepKind::kRest;
      if (Peek().kind == Tok::kNumber) {
        const Tok& vt = Peek();
        s.end.time_s = Positive(Quantity(Dimension::kTime, "the rest duration"), vt, "the rest duration");
      }
      StepTail(s, true);
    } else if (k == "discharge") {
      Level l = LoadLevel("the discharge level", false);
      site.level_col = l.col;
      s.kind = l.mode == LoadMode::kCurrent ? StepKind::kConstantCurrent
               : l.mode == LoadMode::kPower ? StepKind::kConstantPower
                                            : StepKind::kConstantResistance;
      (l.mode == LoadMode::kCurrent ? s.current_a : l.mode == LoadMode::kPower ? s.power_w : s.resistance_ohm) = l.value;
      StepTail(s, true);
    } else if (k == "pulse") {
      s.kind = StepKind::kPulseTrain;
      site.level_col = Peek().col;
      Segment hi = SegmentSpec("the pulse level");
      hi.name = "high";
      Segment lo = SegmentSpec("the level between pulses");
      lo.name = "low";
      s.segments = {hi, lo};
      StepTail(s, true);
    } else if (k == "play") {
      s.kind = StepKind::kDutyCycle;
      const Tok& n = ExpectWord("the name of a duty pattern");
      auto it = profiles_.find(n.text);
      if (it == profiles_.end() && broken_profiles_.count(n.text)) throw LineSkipped{};  // its block has the error
      if (it == profiles_.end()) {
        std::vector<std::string> names;
        for (const auto& [name, segs] : profiles_) names.push_back(name);
        Fail(n, fmt::format("no duty named '{}' is defined above{}", n.text, DidYouMean(n.text, names)));
      }
      s.profile_name = n.text;
      s.segments = it->second;
      site.level_col = n.col;
      if (PeekWord("compress")) {
        Next();
        ExpectOp("=");
        const Tok& vt = Peek();
        double to_s = Positive(Quantity(Dimension::kTime, "the compressed duration"), vt, "the compressed duration");
        // The longest phase among those at the lowest current.
        double low = s.segments[0].level;
        for (const Segment& g : s.segments)
          if (g.mode == LoadMode::kCurrent) low = std::min(low, g.level);
        int pick = -1;
        for (size_t i = 0; i < s.segments.size(); ++i) {
          const Segment& g = s.segments[i];
          if (g.mode == LoadMode::kCurrent && g.level == low && (pick < 0 || g.duration_s > s.segments[pick].duration_s))
            pick = static_cast<int>(i);
        }
        if (pick < 0) Fail(vt, "compress= needs a phase given as a current");
        if (to_s >= s.segments[pick].duration_s)
          Fail(vt, fmt::format("compress={} is not shorter than phase '{}' ({})", vt.text, s.segments[pick].name,
                               FormatQuantity(s.segments[pick].duration_s, Dimension::kTime)));
        s.segments[pick].duration_s = to_s;
      }
      StepTail(s, true);
    } else if (k == "dcir") {
      s.kind = StepKind::kResistanceTest;
      site.level_col = Peek().col;
      Segment a = SegmentSpec("the first (lower) current");
      a.name = "I1";
      Segment b = SegmentSpec("the second (higher) current");
      b.name = "I2";
      if (a.mode != LoadMode::kCurrent || b.mode != LoadMode::kCurrent) Fail(kw, "dcir needs two currents (two-current method)");
      if (!(b.level > a.level)) Fail(kw, "dcir's second current must be higher than the first (two-current method)");
      s.segments = {a, b};
      StepTail(s, false);
    } else if (k == "charge") {
      s.kind = StepKind::kCharge;
      const Tok& ct = Peek();
      site.level_col = ct.col;
      s.charge_current_a = Positive(Quantity(Dimension::kCurrent, "the charge current"), ct, "the charge current");
      if (!PeekWord("to"))
        Fail(Peek(), fmt::format("expected 'to' and the constant-voltage setting (as in to 4.2V), found {}", Describe(Peek())));
      Next();
      const Tok& vt = Peek();
      s.charge_voltage_v = Positive(Quantity(Dimension::kVoltage, "the charge voltage"), vt, "the charge voltage");
      if (plan_.cell.max_v > 0 && s.charge_voltage_v > plan_.cell.max_v + 1e-9)
        Fail(vt, fmt::format("charge voltage {} is above the cell's max {}", vt.text,
                             FormatQuantity(plan_.cell.max_v, Dimension::kVoltage)));
      StepTail(s, true);
    } else if (k == "chamber") {
      s.kind = StepKind::kChamberSet;
      const Tok& ct = Peek();
      site.level_col = ct.col;
      s.chamber_c = Quantity(Dimension::kTemperature, "the chamber set point");
      last_chamber_c_ = s.chamber_c;
      StepTail(s, false);
    } else if (k == "soak") {
      s.kind = StepKind::kChamberSoak;
      if (!last_chamber_c_) Fail(kw, "'soak' needs a 'chamber' step before it (the set point to settle at, as in chamber 40degC)");
      s.chamber_c = *last_chamber_c_;
      const Tok* max_tok = nullptr;
      StepTail(s, false, [&](const Tok& key) {
        const Tok& vt = Peek();
        if (key.text == "within") {
          s.soak_band_c = Positive(Quantity(Dimension::kTemperature, "the soak band (±)"), vt, "the soak band");
        } else if (key.text == "for") {
          s.soak_hold_s = Positive(Quantity(Dimension::kTime, "how long the chamber must stay in the band"), vt, "for=");
        } else if (key.text == "max") {
          s.soak_max_s = Positive(Quantity(Dimension::kTime, "the longest the soak may take"), vt, "max=");
          max_tok = &vt;
        } else {
          Fail(key, Unknown("soak option", key.text, kSoakOptions, "use within=, for=, max=, every=, log-change= or log-gap="));
        }
        return true;
      });
      if (!(s.soak_band_c > 0)) Fail(toks_.back(), "a soak needs within= (the band around the set point, e.g. within=0.5degC)");
      if (!(s.soak_hold_s > 0)) Fail(toks_.back(), "a soak needs for= (how long the chamber stays in the band, e.g. for=30min)");
      if (!(s.soak_max_s > 0)) Fail(toks_.back(), "a soak needs max= (when to give up and abort, e.g. max=2h)");
      if (s.soak_max_s <= s.soak_hold_s) Fail(*max_tok, "max= must be longer than for= (the soak could never finish)");
    } else {
      Fail(kw, Unknown("statement", k, kStatements, "not a step"));
    }
    for (const Segment& g : s.segments)
      if (g.level == 0 && g.mode != LoadMode::kCurrent) Fail(kw, "a zero level must be written as a current (0A)");
    AddStep(std::move(s), site);
  }

  // Checks that need the whole file.
  void Finish(int last_line) {
    for (const Block& b : blocks_)
      Error(b.line, b.col, fmt::format("'{}' is not closed: add 'end'", b.kind == Block::kRepeat ? "repeat" : "duty"));
    if (patterns_only_) {
      if (out_.errors.empty() && profiles_.empty()) Error(std::max(1, last_line), 1, "no 'duty' block in this text");
      return;
    }
    if (!cell_seen_) {
      if (out_.errors.empty()) Error(1, 1, "missing 'cell' line (chemistry, rated=, cutoff=...)");
      return;
    }
    if (plan_.steps.empty()) {
      if (out_.errors.empty()) Error(std::max(1, last_line), 1, "the procedure has no steps");
      return;
    }
    // Limits and checks below are derived from the cell and safety lines; one
    // of them was rejected, so they would only repeat its error.
    if (header_rejected_) return;
    SafetyLimits& l = plan_.limits;
    const CellSpec& c = plan_.cell;
    if (!set_.max_temp) l.max_temp_c = c.max_temp_c;
    if (!set_.min_v) l.min_voltage_v = std::max(0.0, c.cutoff_v - 0.3);
    if (!set_.max_v && c.max_v > 0) l.max_voltage_v = c.max_v + 0.05;
    if (!set_.max_q) l.max_charge_mah = 1.5 * c.rated_mah;
    double most_a = 0.0;
    for (const Step& s : plan_.steps) {
      most_a = std::max({most_a, s.current_a, s.charge_current_a});
      for (const Segment& g : s.segments)
        if (g.mode == LoadMode::kCurrent) most_a = std::max(most_a, g.level);
      // Constant power draws most at the lowest voltage the run may reach;
      // constant resistance at the highest.
      if (s.kind == StepKind::kConstantPower) most_a = std::max(most_a, s.power_w / std::max(0.5, l.min_voltage_v));
      if (s.kind == StepKind::kConstantResistance && s.resistance_ohm > 0)
        most_a = std::max(most_a, (c.max_v > 0 ? c.max_v : l.max_voltage_v) / s.resistance_ohm);
      for (const Segment& g : s.segments) {
        if (g.mode == LoadMode::kPower) most_a = std::max(most_a, g.level / std::max(0.5, l.min_voltage_v));
        if (g.mode == LoadMode::kResistance && g.level > 0) most_a = std::max(most_a, c.max_v / g.level);
      }
    }
    if (!set_.max_i) l.max_current_a = std::max(0.1, 1.25 * most_a);
    if (l.over_temp_action == OverTempAction::kPause) {
      if (!set_.resume)
        Error(pause_line_, pause_col_, "when-hot=pause needs resume-temp= (the temperature to continue at)");
      else if (l.resume_temp_c >= l.max_temp_c)
        Error(pause_line_, resume_col_, "resume-temp must be below max-temp (hysteresis)");
      if (!set_.hard) l.hard_temp_c = l.max_temp_c + 10.0;
    }
    for (size_t i = 0; i < plan_.steps.size(); ++i) {
      const Step& s = plan_.steps[i];
      const StepSite& site = sites_[i];
      auto over = [&](double a) { return a > l.max_current_a + 1e-12; };
      bool too_much = over(s.current_a) || over(s.charge_current_a);
      for (const Segment& g : s.segments) too_much = too_much || (g.mode == LoadMode::kCurrent && over(g.level));
      if (too_much)
        Error(s.source_line, site.level_col,
              fmt::format("this step asks more than the safety limit max-current={}",
                          FormatQuantity(l.max_current_a, Dimension::kCurrent)));
      if (s.end.voltage_below_v && *s.end.voltage_below_v < l.min_voltage_v)
        Error(s.source_line, site.keyword_col,
              fmt::format("the step's voltage end {:g} V is below the safety min-voltage {:g} V: it would abort before it ends",
                          *s.end.voltage_below_v, l.min_voltage_v));
      else if (s.end.voltage_below_v && c.cutoff_v > 0 && *s.end.voltage_below_v < c.cutoff_v - 1e-9)
        Warn(s.source_line, site.keyword_col,
             fmt::format("the step discharges to {:g} V, below the cell's cutoff {:g} V", *s.end.voltage_below_v, c.cutoff_v));
      // End conditions a healthy cell meets at once.
      if (IsDischargeKind(s.kind) && s.end.voltage_below_v && c.max_v > 0 && *s.end.voltage_below_v >= c.max_v)
        Warn(s.source_line, site.keyword_col,
             fmt::format("'voltage<={:g}V' is already true at the start: a full cell reads at most {:g} V", *s.end.voltage_below_v,
                         c.max_v));
      if (s.kind == StepKind::kCharge && s.end.voltage_above_v && c.cutoff_v > 0 && *s.end.voltage_above_v <= c.cutoff_v)
        Warn(s.source_line, site.keyword_col,
             fmt::format("'voltage>={:g}V' is already true when the charge starts: an empty cell still reads its cutoff {:g} V",
                         *s.end.voltage_above_v, c.cutoff_v));
      // 20 degC: a usual laboratory ambient (common practice, no source).
      if (s.end.temperature_above_c && *s.end.temperature_above_c <= 20.0)
        Warn(s.source_line, site.keyword_col,
             fmt::format("'temperature>={:g}degC' is already true in a laboratory at room temperature", *s.end.temperature_above_c));
    }
    if (l.chamber_min_c && l.chamber_max_c && *l.chamber_min_c >= *l.chamber_max_c)
      Error(chamber_limit_line_, chamber_limit_col_, "chamber-min must be below chamber-max");
    for (size_t i = 0; i < plan_.steps.size(); ++i) {
      const Step& s = plan_.steps[i];
      if (s.kind != StepKind::kChamberSet) continue;
      if (l.chamber_min_c && s.chamber_c < *l.chamber_min_c)
        Error(s.source_line, sites_[i].level_col,
              fmt::format("chamber set point {:g} degC is below the safety chamber-min={:g}degC", s.chamber_c, *l.chamber_min_c));
      if (l.chamber_max_c && s.chamber_c > *l.chamber_max_c)
        Error(s.source_line, sites_[i].level_col,
              fmt::format("chamber set point {:g} degC is above the safety chamber-max={:g}degC", s.chamber_c, *l.chamber_max_c));
    }
    for (const std::string& p : ApplyRigLimits(plan_, rig_)) {
      // "line N: message"
      int line = 1;
      if (p.size() > 5) (void)std::from_chars(p.data() + 5, p.data() + p.size(), line);
      size_t colon = p.find(": ");
      Error(line, 1, colon == std::string::npos ? p : p.substr(colon + 2));
    }
  }

  const RigLimits& rig_;
  std::optional<double> last_chamber_c_;  // the latest chamber set point, for the soaks after it
  int chamber_limit_line_ = 1, chamber_limit_col_ = 1;
  Plan plan_;
  ParseOutput out_;
  std::vector<Tok> toks_;
  size_t at_ = 0;
  int line_ = 0;
  std::string_view line_text_;
  bool cell_seen_ = false;
  int cell_line_ = 0;
  double default_period_s_ = 1.0;
  std::optional<double> default_log_change_v_;
  std::vector<Block> blocks_;
  std::map<std::string, std::vector<Segment>> profiles_;
  std::map<std::string, int> profiles_line_;
  std::set<std::string> broken_profiles_;  // duty blocks rejected with an error of their own
  bool no_cell_reported_ = false;
  bool cell_rejected_ = false;
  bool patterns_only_ = false;
  bool header_rejected_ = false;           // the cell or safety line had an error: no checks derived from them
  std::vector<StepSite> sites_;
  struct {
    bool max_temp = false, min_v = false, max_v = false, max_i = false, max_t = false, max_q = false, resume = false,
         hard = false;
  } set_;
  int pause_line_ = 0, pause_col_ = 1, resume_col_ = 1;
};

}  // namespace

ParseOutput ParseProcedure(std::string_view text, const std::string& name, const RigLimits& rig) {
  Parser p(name, rig);
  return p.Run(text);
}

std::string FormatDiagnostics(const std::string& file, const std::vector<Diagnostic>& errors) {
  std::string out;
  for (const Diagnostic& d : errors) out += fmt::format("{}:{}:{}: {}\n", file, d.line, d.col, d.message);
  return out;
}

Result<std::vector<DutyPattern>> ReadDutyPatterns(std::string_view text, const std::string& file) {
  const RigLimits no_rig{};  // Parser keeps a reference: the limits must outlive it
  Parser p(file, no_rig);
  p.PatternsOnly();
  ParseOutput out = p.Run(text);
  if (!out.ok()) {
    std::string msg = FormatDiagnostics(file, out.errors);
    if (!msg.empty() && msg.back() == '\n') msg.pop_back();
    return InvalidInput(msg);
  }
  return p.Patterns();
}

Result<Plan> CompileProcedure(std::string_view text, const std::string& file, const RigLimits& rig) {
  std::string stem = file;
  size_t slash = stem.find_last_of('/');
  if (slash != std::string::npos) stem = stem.substr(slash + 1);
  size_t dot = stem.rfind('.');
  if (dot != std::string::npos && dot > 0) stem.resize(dot);
  ParseOutput out = ParseProcedure(text, stem, rig);
  if (!out.ok()) {
    std::string msg = FormatDiagnostics(file, out.errors);
    if (!msg.empty() && msg.back() == '\n') msg.pop_back();
    return InvalidInput(msg);
  }
  return std::move(out.plan);
}

}  // namespace kp
