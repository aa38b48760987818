// etchguard core: the process-antenna ratio model of antenna-model.md, in C++17.
//
// A library a C++ router can link on its own (no Python, no gRPC inside). Data flows
// one way: a DeckSpec (plain values) is compiled into a Model; a Net holds one net's
// pins and shapes, its components at every process step (kept incrementally on add
// and remove) and answers checks, what-if scores, batches and headroom.
//
// Exactness: coordinates are int64 DBU; areas and perimeters are exact integers
// (__int128 where a product or sum could pass int64); pin figures (gate, diffusion,
// in-cell area) are summed exactly (Shewchuk partials, the method of Python's
// math.fsum), so a figure never depends on the order shapes were added or removed.
// A Net is not thread-safe; distinct Nets may be used from distinct threads.
#pragma once

#include <cstdint>
#include <memory>
#include <string>
#include <utility>
#include <vector>

namespace etchguard {

using i64 = std::int64_t;
using i128 = __int128;

// Coordinates must lie strictly inside +-2^62 DBU (so a width fits int64).
constexpr i64 kCoordLimit = i64(1) << 62;

struct Rect {
  i64 xlo, ylo, xhi, yhi;
};

enum class Measure : std::uint8_t { Area = 0, Side = 1 };
enum class Kind : std::uint8_t { Partial = 0, Cumulative = 1 };

// A piecewise-linear table of (x, y) points, x strictly increasing; held constant
// beyond the first and last point. Empty means "not given".
struct Table {
  std::vector<std::pair<double, double>> points;
  bool empty() const { return points.empty(); }
  double at(double x) const;
};

struct RuleSpec {
  int step = 0;
  Measure measure = Measure::Area;
  int oxide = 0;  // index into DeckSpec::oxides
  bool has_partial_max = false;
  double partial_max = 0.0;
  bool has_cumulative_max = false;
  double cumulative_max = 0.0;
  double area_factor = 1.0;
  bool factor_with_diode_only = false;
  Table diode_partial_max, diode_cumulative_max, diode_area_reduction;
  double diode_gate_factor = 0.0;   // k_gate
  double diode_area_credit = 0.0;   // k_credit

  bool has_partial() const { return has_partial_max || !diode_partial_max.empty(); }
  bool has_cumulative() const { return has_cumulative_max || !diode_cumulative_max.empty(); }
  double partial_limit(double diff_um2) const;
  double cumulative_limit(double diff_um2) const;
  // max(0, f * r(D) * A - k_credit * D) / (G + k_gate * D)
  double ratio(double conductor, double gate_um2, double diff_um2) const;
  // f * r(D), the factor on A in ratio() (f = 1 where factor_with_diode_only and D = 0).
  double conductor_factor(double diff_um2) const;
  // The conductor A' at which spent + ratio(A') reaches limit, minus `conductor`.
  double headroom(double limit, double gate_um2, double diff_um2, double spent,
                  double conductor) const;
};

struct LayerSpec {
  bool cut = false;
  double thickness_um = 0.0;  // 0: not given
  i64 wire_width = 0;         // 0: not given
  bool cumulative_plus_cut = false;
};

struct DeckSpec {
  i64 dbu_per_micron = 1000;
  bool cumulative_includes_cuts = false;
  std::vector<LayerSpec> layers;    // process order, bottom-up
  std::vector<std::string> oxides;  // oxide class names; rules and pins index them
  std::vector<RuleSpec> rules;      // at most one per (step, measure, oxide)
};

struct CostModel {
  double knee = 0.7, exponent = 3.0, scale = 10.0, violation = 1.0e6, over_slope = 1.0e3;
  double cost(double utilization) const;
};

constexpr double kTolerance = 1e-9;
inline bool is_legal(double utilization) { return utilization <= 1.0 + kTolerance; }
double utilization(double ratio, double limit);

class Model;  // a compiled deck (opaque; see model.hpp inside the library)

// Compile a deck. Throws std::invalid_argument naming the field on a deck the core
// cannot use (the Python face validates decks fully before this).
std::shared_ptr<const Model> compile(const DeckSpec& deck);
int model_steps(const Model& model);
int model_groups(const Model& model);  // (measure, oxide) groups of cumulative rules

// A cumulative ratio already accumulated inside a block (LEF's ANTENNAMAXAREACAR,
// ANTENNAMAXSIDEAREACAR, ANTENNAMAXCUTCAR on a block pin), for the pin's gates of `oxide`:
// the block's cumulative sum on `step`'s layer, at and below it, for `measure`. Model::
// block_car says how it enters a gate's CAR.
struct BlockCar {
  int step;
  Measure measure;
  int oxide;
  double ratio;
};

// A pin's rectangles connect like routed ones of their layer and among themselves (one
// conductor inside the cell), each from its own layer's step on; the pin, with its
// figures, joins the structure at `layer`, the lowest of its rectangles' layers.
struct PinSpec {
  int layer = 0;
  std::vector<Rect> rects;               // at least one
  std::vector<int> rect_layers;          // per rectangle; empty: every one on `layer`
  int rect_layer(std::size_t k) const { return rect_layers.empty() ? layer : rect_layers[k]; }
  std::vector<double> gate_by_oxide;     // per DeckSpec oxide (missing: 0)
  double gate_total_um2 = -1.0;          // G of the pin; < 0: the sum of gate_by_oxide
  double diff_um2 = 0.0;
  std::vector<std::pair<int, double>> cell_um2;  // (step, in-cell conductor um^2), area measure
  // (step, in-cell side-wall um^2), side measure: already a side-wall area (LEF's
  // ANTENNAPARTIALMETALSIDEAREA), added to perimeter x thickness as cell_um2 is to the area
  std::vector<std::pair<int, double>> cell_side_um2;
  std::vector<BlockCar> block_car;  // empty for a pin that is not a block's
};

struct Shape {
  int layer;
  Rect rect;
};

// One check on one component (a report line, or a what-if's figure after).
struct Check {
  int step;
  Measure measure;
  Kind kind;
  int oxide;
  double ratio, limit, utilization;
  int gate;  // pin index of the gate with this (worst) ratio
};

struct RatioChange {
  Check after;
  bool has_before;
  double before_ratio, before_utilization;
  double headroom_um2;
  bool has_length;
  double headroom_length_um;
};

struct Score {
  std::vector<double> added_area_um2;  // per step (0 where nothing is added)
  std::vector<std::uint8_t> adds_on;   // per step: the candidate has shapes on that layer
  double worst_change_utilization = 0.0;
  double worst_utilization = 0.0;
  bool legal = true;
  bool breaks_limit = false;
  double cost = 0.0;
  std::vector<RatioChange> changes;  // only with detail
};

// The most by which a changed ratio of a detailed score exceeds its limit (ratio - limit
// of its changes; -infinity without changes): what repair advice's diode search asks of
// every trial diode. Taken over the changes in order, a later one replacing the held one
// only when greater (so a NaN first change stays, as Python's max keeps it).
double most_excess(const Score& score);

// The worst case per (step, measure, kind, oxide) over the net's components.
struct Report {
  double worst_utilization = 0.0;
  bool legal = true;
  std::vector<Check> checks;  // sorted by (step, measure, kind, oxide)
};

// Every failing check of every component, with the component's members.
struct Offence {
  Check check;
  std::vector<i64> shape_ids;  // sorted
  std::vector<int> pins;       // sorted
};

struct Headroom {
  bool found = false;
  double area_um2, side_um2, length_um;
  // what binds: step, kind, measure, oxide and gate pin (-1 for partial)
  int bind_step = -1;
  Kind bind_kind = Kind::Partial;
  Measure bind_measure = Measure::Area;
  int bind_oxide = -1;
  int bind_gate = -1;
};

// A component's budget (Net::budget): every ratio that an addition to the component on
// the budget's layer changes, as a function of the added area a (um^2) and the added
// perimeter p (um) of its union there, exact while the addition extends that one
// component and touches nothing else of the net. With `common` shapes, the answer is
// that of common + addition as one candidate (see budget.cpp). Evaluating it:
//   A' = conductor + per_area * a + per_perimeter * p        per term
//   term = max(0, factor * A' - credit) / gate                  (affine in a and p above 0)
//   ratio = max(floor, spent + term)   (a ratio without a term is its floor)
// A ratio counts as a change when `always`, or when a watch at its step has a value
// other than its `held` one (the component's best CAR of one (measure, oxide) moved:
// the what-if's test, Net::score); worst utilization among changes =
// max(fixed_change, counted ones), of the whole net = max(rest_worst, all of them).
struct BudgetTerm {
  Measure measure;
  int oxide;
  double conductor;      // A now: um^2 (area) or side-wall um^2 (side)
  double per_area;       // dA per um^2 of added area (1 for area, else 0)
  double per_perimeter;  // dA per um of added perimeter (thickness for side, else 0)
  double factor, credit, gate;
};

struct BudgetRatio {
  int step;
  Measure measure;
  Kind kind;
  int oxide;
  double limit;
  int term;      // index into Budget::terms; -1: the ratio does not depend on the addition
  double spent;  // added to the term: the sum of the other steps
  double floor;  // the ratio is at least this (gates the addition does not reach); -inf: none
  bool always;   // a change of every candidate, whatever its size
  int gate;      // pin index of the gate with this ratio now
};

// The component's best CAR at a step for one (measure, oxide), as a ratio's value
// (max(floor, spent + term)), and that best in the held net (without common).
struct BudgetWatch {
  int step;
  int term;  // -1: the addition does not reach it
  double spent, floor, held;
};

struct Budget {
  bool found = false;  // false: nothing of the net (or common) lies on the layer at the point
  int layer = -1;
  std::vector<BudgetTerm> terms;
  std::vector<BudgetRatio> ratios;
  std::vector<BudgetWatch> watches;  // steps above the layer whose ratios are not `always`
  double rest_worst = 0.0;        // worst utilization of every other ratio of the net
  double fixed_change = 0.0;      // worst utilization among the changes common makes elsewhere
  double common_added_um2 = 0.0;  // union area common adds, over its layers
  // What a client needs to tell a covered candidate and its added area and perimeter:
  // the component's routed and pin rectangles on the layer, and every other element of
  // the net (layer, rect) a candidate on the layer would touch (so merge with), all
  // that meet the window.
  std::vector<Rect> own, own_pins;
  std::vector<std::pair<int, Rect>> foreign;
};

// Result codes of calls that can refuse (the Net is unchanged on refusal).
enum class Status : std::uint8_t { Ok = 0, BadLayer, BadRect, DuplicateId, UnknownId };

struct Toucher {
  int element;  // element id (see Net::element_shape_id)
  int step;     // the step from which the contact exists
};

class Net {
 public:
  Net(std::shared_ptr<const Model> model, std::vector<PinSpec> pins);
  ~Net();
  Net(Net&&) noexcept;
  Net& operator=(Net&&) noexcept;
  Net(const Net&) = delete;
  Net& operator=(const Net&) = delete;

  // Mutations validate first and change nothing on refusal.
  Status add(i64 id, int layer, const Rect& r);
  Status add_many(const i64* ids, const int* layers, const Rect* rects, std::size_t n);
  Status remove(const i64* ids, std::size_t n);  // all or none

  std::size_t shape_count() const;
  bool has_shape(i64 id) const;
  // Held shapes in the order they were added (ids, layers, rects).
  void shapes(std::vector<i64>& ids, std::vector<int>& layers, std::vector<Rect>& rects) const;

  Report check() const;
  std::vector<Offence> offences() const;
  double worst_at(int step) const;  // the net's worst utilization at a step, as held

  // What committing `cands` (and pins `extra`) would do; changes nothing. Throws
  // std::invalid_argument on a bad layer or rectangle.
  Score score(const Shape* cands, std::size_t n, bool detail, const CostModel& costs,
              const PinSpec* extra = nullptr, std::size_t n_extra = 0) const;
  // Candidates of counts[i] consecutive shapes each (counts null: one shape each);
  // out arrays of n_candidates entries.
  void score_batch(const Shape* shapes, std::size_t n_shapes, const i64* counts,
                   std::size_t n_candidates, const CostModel& costs, double* worst_change,
                   double* worst, std::uint8_t* legal, std::uint8_t* breaks, double* cost,
                   double* added_um2) const;

  // A batch whose candidates share shapes, such as the partial path a search extends,
  // sent once: part k is common_counts[k] consecutive rows of `common`, and candidate i
  // is part part_of[i] (-1: none) followed by its own counts[i] shapes (counts null:
  // one each). Every figure equals score_batch of the same candidates sent whole.
  // Throws std::invalid_argument naming the bad count or part (see shared_batch.cpp).
  void score_batch_common(const Shape* shapes, std::size_t n_shapes, const i64* counts,
                          std::size_t n_candidates, const Shape* common, std::size_t n_common,
                          const i64* common_counts, std::size_t n_parts, const i64* part_of,
                          const CostModel& costs, double* worst_change, double* worst,
                          std::uint8_t* legal, std::uint8_t* breaks, double* cost,
                          double* added_um2) const;

  Headroom headroom(int layer, i64 x, i64 y) const;

  // The budget of the component at (x, y) on `layer`, with `common` shapes taken as
  // committed; rectangles listed are those meeting `window`. Changes nothing. Throws
  // std::invalid_argument naming a bad layer, common shape or window.
  Budget budget(int layer, i64 x, i64 y, const Shape* common, std::size_t n_common, const Rect& window) const;

  // Queries for repair advice: elements that connect to a rectangle on a layer; whether
  // the component holding an element at a step has gate area; the net's own rectangles
  // on a layer that meet a closed rectangle.
  std::vector<Toucher> touching(int layer, const Rect& r) const;
  bool reaches_gate(int element, int step) const;
  // Per step, the diffusion area (um^2) of the component holding pin `pin` (NaN below
  // the pin's layer).
  std::vector<double> pin_diffusion(int pin) const;
  std::vector<Rect> near(int layer, const Rect& r) const;
  // What an element is: its layer, rectangle and shape id (-1 - pin index for a pin
  // rectangle). Throws std::invalid_argument for an element the net does not hold.
  struct ElementInfo {
    int layer;
    Rect rect;
    i64 shape_id;
  };
  ElementInfo element(int element) const;

  std::size_t memory_bytes() const;  // approximate heap use of this net

  struct State;  // defined inside the library only

 private:
  std::unique_ptr<State> s_;
};

}  // namespace etchguard

namespace etchguard {
// The library's version, for the binding and the C++ example to report.
const char* core_version();
}  // namespace etchguard
