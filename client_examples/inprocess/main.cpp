// etchguard in-process: a C++ program that links the etchguard core directly (no Python,
// no gRPC) and asks it what a router asks: build the deck's Model, open a net with its
// pins, commit shapes, check the net, and score candidates one by one and as a batch.
//
//   etchguard_inprocess INPUT [--repeat N]
//
// INPUT (or "-" for standard input) is the small line format below; demo_input.txt in
// this folder is the demo deck lumen-6m with a two-gate net (tests/test_inprocess_example.py
// writes it from the Python package's own deck and net, and holds this program's output
// to the Python Engine's, figure for figure).
//
// Input, one statement a line; '#' starts a comment; words separated by blanks:
//   process DBU_PER_MICRON CUMULATIVE_INCLUDES_CUTS(0|1)
//   layer NAME routing|cut THICKNESS_UM WIRE_WIDTH CUMULATIVE_PLUS_CUT(0|1)
//       (bottom-up, in process order; 0 for a thickness or width not given)
//   oxide NAME
//   rule LAYER OXIDE area|side PARTIAL_MAX|- CUMULATIVE_MAX|- AREA_FACTOR
//        FACTOR_WITH_DIODE_ONLY(0|1) DIODE_GATE_FACTOR DIODE_AREA_CREDIT
//        TABLE(diode_partial_max) TABLE(diode_cumulative_max) TABLE(diode_area_reduction)
//       where TABLE is N X1 Y1 ... XN YN (0 for none)
//   cost KNEE EXPONENT SCALE VIOLATION OVER_SLOPE        (optional; the defaults otherwise)
//   pin NAME LAYER DIFF_UM2 [gate OXIDE UM2]... [cell LAYER UM2]... rect XLO YLO XHI YHI...
//   shape LAYER XLO YLO XHI YHI                           (committed; ids 1, 2, ...)
//   candidate LAYER XLO YLO XHI YHI [LAYER XLO YLO XHI YHI]...   (one candidate)
// Coordinates are DBU integers; every other number is read with strtod, so a value
// written with 17 significant digits (or Python's repr) arrives to the bit.
//
// Output, one line each, floats with %.17g (they read back to the same double):
//   core VERSION
//   check LAYER MEASURE KIND OXIDE ratio=R limit=L utilization=U gate=PIN   (worst cases)
//   net shapes=N worst=U legal=0|1 checks=N
//   candidate I worst_change=U worst=U legal=0|1 breaks=0|1 cost=C changes=N added=LAYER:UM2,...
//   batch I worst_change=U worst=U legal=0|1 breaks=0|1 cost=C added=UM2
// "candidate" is Net::score without detail (a router's everyday question; changes= counts
// the changed ratios of the same call with detail); "batch" is Net::score_batch over all
// candidates at once, the fastest way to score many. With --repeat N the time per scalar
// score (mean, p50 and p99 of the calls) and per batch candidate goes to standard error.
#include <algorithm>
#include <chrono>
#include <cstdint>
#include <cstdio>
#include <cstdlib>
#include <fstream>
#include <iostream>
#include <memory>
#include <sstream>
#include <stdexcept>
#include <string>
#include <vector>

#include "etchguard/core.hpp"

namespace eg = etchguard;

namespace {

struct Input {
  eg::DeckSpec deck;
  std::vector<std::string> layer_names;
  eg::CostModel costs;
  std::vector<std::string> pin_names;
  std::vector<eg::PinSpec> pins;
  std::vector<eg::Shape> shapes;
  std::vector<std::vector<eg::Shape>> candidates;
};

[[noreturn]] void fail(int line, const std::string& why) {
  throw std::runtime_error("input line " + std::to_string(line) + ": " + why);
}

class Words {
 public:
  Words(const std::string& text, int line) : line_(line) {
    std::istringstream in(text);
    for (std::string w; in >> w;) words_.push_back(w);
  }
  bool done() const { return next_ >= words_.size(); }
  const std::string& peek(const char* what) const {
    if (done()) fail(line_, std::string("missing ") + what);
    return words_[next_];
  }
  const std::string& word(const char* what) {
    peek(what);
    return words_[next_++];
  }
  // A number, or "-" for not given (then `has` stays false).
  void optional_number(const char* what, bool* has, double* value) {
    if (peek(what) == "-") {
      ++next_;
      return;
    }
    *has = true;
    *value = number(what);
  }
  double number(const char* what) {
    const std::string& w = word(what);
    char* end = nullptr;
    double v = std::strtod(w.c_str(), &end);
    if (end == w.c_str() || *end != '\0') fail(line_, std::string("bad number for ") + what + ": " + w);
    return v;
  }
  eg::i64 integer(const char* what) {
    const std::string& w = word(what);
    char* end = nullptr;
    long long v = std::strtoll(w.c_str(), &end, 10);
    if (end == w.c_str() || *end != '\0') fail(line_, std::string("bad integer for ") + what + ": " + w);
    return v;
  }
  bool flag(const char* what) { return integer(what) != 0; }
  int line() const { return line_; }

 private:
  std::vector<std::string> words_;
  std::size_t next_ = 0;
  int line_;
};

int index_of(const std::vector<std::string>& names, const std::string& name, int line,
             const char* what) {
  for (std::size_t i = 0; i < names.size(); ++i)
    if (names[i] == name) return static_cast<int>(i);
  fail(line, std::string("unknown ") + what + " " + name);
}

eg::Table table(Words& w) {
  eg::Table t;
  eg::i64 n = w.integer("table size");
  for (eg::i64 i = 0; i < n; ++i) {
    double x = w.number("table x");
    t.points.emplace_back(x, w.number("table y"));
  }
  return t;
}

eg::Rect rect(Words& w) {
  eg::Rect r;
  r.xlo = w.integer("xlo");
  r.ylo = w.integer("ylo");
  r.xhi = w.integer("xhi");
  r.yhi = w.integer("yhi");
  return r;
}

eg::Shape shape(Words& w, const Input& in) {
  int layer = index_of(in.layer_names, w.word("layer"), w.line(), "layer");
  return eg::Shape{layer, rect(w)};
}

Input read_input(std::istream& file) {
  Input in;
  std::string text;
  int line = 0;
  while (std::getline(file, text)) {
    ++line;
    std::size_t hash = text.find('#');
    if (hash != std::string::npos) text.resize(hash);
    Words w(text, line);
    if (w.done()) continue;
    const std::string what = w.word("statement");
    if (what == "process") {
      in.deck.dbu_per_micron = w.integer("dbu_per_micron");
      in.deck.cumulative_includes_cuts = w.flag("cumulative_includes_cuts");
    } else if (what == "layer") {
      in.layer_names.push_back(w.word("layer name"));
      const std::string kind = w.word("layer kind");
      if (kind != "routing" && kind != "cut") fail(line, "layer kind must be routing or cut");
      eg::LayerSpec l;
      l.cut = kind == "cut";
      l.thickness_um = w.number("thickness_um");
      l.wire_width = w.integer("wire_width");
      l.cumulative_plus_cut = w.flag("cumulative_plus_cut");
      in.deck.layers.push_back(l);
    } else if (what == "oxide") {
      in.deck.oxides.push_back(w.word("oxide name"));
    } else if (what == "rule") {
      eg::RuleSpec r;
      r.step = index_of(in.layer_names, w.word("layer"), line, "layer");
      r.oxide = index_of(in.deck.oxides, w.word("oxide"), line, "oxide");
      const std::string measure = w.word("measure");
      if (measure != "area" && measure != "side") fail(line, "measure must be area or side");
      r.measure = measure == "area" ? eg::Measure::Area : eg::Measure::Side;
      w.optional_number("partial_max", &r.has_partial_max, &r.partial_max);
      w.optional_number("cumulative_max", &r.has_cumulative_max, &r.cumulative_max);
      r.area_factor = w.number("area_factor");
      r.factor_with_diode_only = w.flag("factor_with_diode_only");
      r.diode_gate_factor = w.number("diode_gate_factor");
      r.diode_area_credit = w.number("diode_area_credit");
      r.diode_partial_max = table(w);
      r.diode_cumulative_max = table(w);
      r.diode_area_reduction = table(w);
      in.deck.rules.push_back(r);
    } else if (what == "cost") {
      in.costs.knee = w.number("knee");
      in.costs.exponent = w.number("exponent");
      in.costs.scale = w.number("scale");
      in.costs.violation = w.number("violation");
      in.costs.over_slope = w.number("over_slope");
    } else if (what == "pin") {
      in.pin_names.push_back(w.word("pin name"));
      eg::PinSpec p;
      p.layer = index_of(in.layer_names, w.word("pin layer"), line, "layer");
      p.gate_by_oxide.assign(in.deck.oxides.size(), 0.0);
      p.diff_um2 = w.number("diff_um2");
      while (!w.done()) {
        const std::string part = w.word("pin part");
        if (part == "gate") {
          int ox = index_of(in.deck.oxides, w.word("oxide"), line, "oxide");
          p.gate_by_oxide[ox] = w.number("gate um2");
        } else if (part == "cell") {
          int step = index_of(in.layer_names, w.word("cell layer"), line, "layer");
          p.cell_um2.emplace_back(step, w.number("cell um2"));
        } else if (part == "rect") {
          p.rects.push_back(rect(w));
        } else {
          fail(line, "pin part must be gate, cell or rect, not " + part);
        }
      }
      if (p.rects.empty()) fail(line, "a pin needs a rect");
      in.pins.push_back(std::move(p));
    } else if (what == "shape") {
      in.shapes.push_back(shape(w, in));
    } else if (what == "candidate") {
      std::vector<eg::Shape> c;
      do {
        c.push_back(shape(w, in));
      } while (!w.done());
      in.candidates.push_back(std::move(c));
    } else {
      fail(line, "unknown statement " + what);
    }
    if (!w.done()) fail(line, "unexpected words at the end");
  }
  return in;
}

const char* measure_name(eg::Measure m) { return m == eg::Measure::Area ? "area" : "side"; }
const char* kind_name(eg::Kind k) { return k == eg::Kind::Partial ? "partial" : "cumulative"; }

const char* status_name(eg::Status s) {
  switch (s) {
    case eg::Status::Ok: return "ok";
    case eg::Status::BadLayer: return "bad layer";
    case eg::Status::BadRect: return "bad rectangle";
    case eg::Status::DuplicateId: return "duplicate id";
    case eg::Status::UnknownId: return "unknown id";
  }
  return "?";
}

int run(int argc, char** argv) {
  if (argc < 2) {
    std::fprintf(stderr, "usage: %s INPUT|- [--repeat N]\n", argv[0]);
    return 2;
  }
  int repeat = 0;
  if (argc == 4 && std::string(argv[2]) == "--repeat") repeat = std::atoi(argv[3]);
  Input in;
  if (std::string(argv[1]) == "-") {
    in = read_input(std::cin);
  } else {
    std::ifstream file(argv[1]);
    if (!file) throw std::runtime_error(std::string("cannot read ") + argv[1]);
    in = read_input(file);
  }

  // The deck, compiled once and shared by every net (a shared_ptr to an immutable Model).
  std::shared_ptr<const eg::Model> model = eg::compile(in.deck);
  eg::Net net(model, in.pins);
  for (std::size_t i = 0; i < in.shapes.size(); ++i) {
    const eg::Shape& s = in.shapes[i];
    eg::Status st = net.add(static_cast<eg::i64>(i + 1), s.layer, s.rect);
    if (st != eg::Status::Ok)
      throw std::runtime_error("shape " + std::to_string(i + 1) + " refused: " + status_name(st));
  }

  std::printf("core %s\n", eg::core_version());
  eg::Report report = net.check();
  for (const eg::Check& c : report.checks) {
    std::printf("check %s %s %s %s ratio=%.17g limit=%.17g utilization=%.17g gate=%s\n",
                in.layer_names.at(c.step).c_str(), measure_name(c.measure), kind_name(c.kind),
                in.deck.oxides.at(c.oxide).c_str(), c.ratio, c.limit, c.utilization,
                c.gate >= 0 ? in.pin_names.at(c.gate).c_str() : "-");
  }
  std::printf("net shapes=%zu worst=%.17g legal=%d checks=%zu\n", net.shape_count(),
              report.worst_utilization, report.legal ? 1 : 0, report.checks.size());

  // One by one: Net::score, verdict only (detail=false) as a router asks while it searches.
  for (std::size_t i = 0; i < in.candidates.size(); ++i) {
    const std::vector<eg::Shape>& c = in.candidates[i];
    eg::Score s = net.score(c.data(), c.size(), false, in.costs);
    std::size_t changes = net.score(c.data(), c.size(), true, in.costs).changes.size();
    std::printf("candidate %zu worst_change=%.17g worst=%.17g legal=%d breaks=%d cost=%.17g "
                "changes=%zu added=",
                i, s.worst_change_utilization, s.worst_utilization, s.legal ? 1 : 0,
                s.breaks_limit ? 1 : 0, s.cost, changes);
    const char* sep = "";
    for (std::size_t step = 0; step < s.added_area_um2.size(); ++step) {
      if (s.added_area_um2[step] == 0.0) continue;
      std::printf("%s%s:%.17g", sep, in.layer_names.at(step).c_str(), s.added_area_um2[step]);
      sep = ",";
    }
    std::printf("\n");
  }

  // All at once: Net::score_batch over the candidates' shapes laid end to end.
  std::vector<eg::Shape> flat;
  std::vector<eg::i64> counts;
  for (const auto& c : in.candidates) {
    flat.insert(flat.end(), c.begin(), c.end());
    counts.push_back(static_cast<eg::i64>(c.size()));
  }
  const std::size_t n = in.candidates.size();
  std::vector<double> worst_change(n), worst(n), cost(n), added(n);
  std::vector<std::uint8_t> legal(n), breaks(n);
  auto batch = [&] {
    net.score_batch(flat.data(), flat.size(), counts.data(), n, in.costs, worst_change.data(),
                    worst.data(), legal.data(), breaks.data(), cost.data(), added.data());
  };
  batch();
  for (std::size_t i = 0; i < n; ++i) {
    std::printf("batch %zu worst_change=%.17g worst=%.17g legal=%d breaks=%d cost=%.17g added=%.17g\n",
                i, worst_change[i], worst[i], legal[i] ? 1 : 0, breaks[i] ? 1 : 0, cost[i],
                added[i]);
  }

  if (repeat > 0 && n > 0) {
    // Each what-if timed on its own (the clock reads cost tens of ns), so the median
    // and the tail are known, not just the mean.
    using clock = std::chrono::steady_clock;
    std::vector<double> per_call;
    per_call.reserve(std::size_t(repeat) * n);
    double sink = 0.0;
    for (int r = 0; r < repeat; ++r) {
      for (const auto& c : in.candidates) {
        auto t0 = clock::now();
        sink += net.score(c.data(), c.size(), false, in.costs).cost;
        per_call.push_back(std::chrono::duration<double, std::micro>(clock::now() - t0).count());
      }
    }
    auto t1 = clock::now();
    for (int r = 0; r < repeat; ++r) batch();
    auto t2 = clock::now();
    double total = 0.0;
    for (double t : per_call) total += t;
    std::sort(per_call.begin(), per_call.end());
    auto at = [&](double q) { return per_call[std::min(per_call.size() - 1, std::size_t(q * per_call.size()))]; };
    double calls = double(repeat) * double(n);
    std::fprintf(stderr,
                 "score: %.3f us per candidate (p50 %.3f, p99 %.3f); score_batch: %.3f us per candidate (%g)\n",
                 total / calls, at(0.5), at(0.99),
                 std::chrono::duration<double, std::micro>(t2 - t1).count() / calls, sink * 0.0);
  }
  return 0;
}

}  // namespace

int main(int argc, char** argv) {
  try {
    return run(argc, argv);
  } catch (const std::exception& e) {
    std::fprintf(stderr, "etchguard_inprocess: %s\n", e.what());
    return 1;
  }
}
