// One net's state: its elements and their components at every process step.
//
// Elements are pin rectangles and routed shapes. Connectivity only grows with the
// steps (a layer, once etched, stays), so the components at step s are unions of those
// at step s-1 and the elements of layer s. For every step the state keeps the map from
// element to component and each component's aggregates (gate, diffusion, in-cell area,
// union area and perimeter on the step's layer). An add merges components step by
// step; a removal splits them where it must (a neighbour test first, a search of the
// one component only when needed). Union area and perimeter change only inside the
// rectangle, so both are updated from its touching neighbours alone.
#pragma once

#include <algorithm>
#include <cstdint>
#include <memory>
#include <unordered_map>
#include <vector>

#include "etchguard/core.hpp"
#include "exact_sum.hpp"
#include "geometry.hpp"
#include "model.hpp"

namespace etchguard {

// A pin's per-step figure (in-cell areas): the value given for `step`, else 0.
inline double at_step(const std::vector<std::pair<int, double>>& per_step, int step) {
  double v = 0.0;
  for (const auto& sc : per_step)
    if (sc.first == step) v = sc.second;
  return v;
}

struct Element {
  Rect r;
  i64 sid;   // shape id; for a pin rectangle -1 - pin index
  i64 seq;   // insertion order (shapes are handed back in it)
  int layer;
  int pin;   // pin index, -1 for a routed shape
  bool anchor;  // the pin's first rectangle: it carries the pin's figures
  bool alive;
};

// What a component holds when it holds pins: most components (floating metal at a
// step) hold none, so these live apart and cost a pointer when absent.
struct PinFigures {
  std::vector<int> gates;  // pin indices with gate area
  std::vector<int> pins;   // every pin index (anchors) in the component
  ExactSum gate, diff, cell, cell_side;
};

struct Comp {
  std::vector<int> members;  // elements
  std::unique_ptr<PinFigures> figures_;
  double G = 0.0, D = 0.0, cell_um2 = 0.0, cell_side_um2 = 0.0;
  i128 area = 0, perim = 0;
  std::uint64_t oxides = 0;  // oxide classes with gate area here
  bool alive = false;

  Comp() = default;
  Comp(const Comp& o)  // a whole copy (a trial copy of a net's state)
      : members(o.members), figures_(o.figures_ ? std::make_unique<PinFigures>(*o.figures_) : nullptr),
        G(o.G), D(o.D), cell_um2(o.cell_um2), cell_side_um2(o.cell_side_um2), area(o.area), perim(o.perim), oxides(o.oxides), alive(o.alive) {}
  Comp& operator=(const Comp& o) {
    if (this != &o) *this = Comp(o);
    return *this;
  }
  Comp(Comp&&) noexcept = default;
  Comp& operator=(Comp&&) noexcept = default;

  const std::vector<int>& gates() const { return figures_ ? figures_->gates : no_pins(); }
  const std::vector<int>& pins() const { return figures_ ? figures_->pins : no_pins(); }
  PinFigures& figures() {
    if (!figures_) figures_ = std::make_unique<PinFigures>();
    return *figures_;
  }
  void refresh() {
    if (figures_) {
      G = figures_->gate.value();
      D = figures_->diff.value();
      cell_um2 = figures_->cell.value();
      cell_side_um2 = figures_->cell_side.value();
    } else {
      G = D = cell_um2 = cell_side_um2 = 0.0;
    }
  }
  void absorb(const Comp& o);
  void absorb_figures(const Comp& o);  // without the member lists (a what-if's group)
  // Back to empty; `keep` keeps the pin figures' buffers (a what-if's scratch group).
  void reset(bool keep = false);

 private:
  static const std::vector<int>& no_pins() {
    static const std::vector<int> none;
    return none;
  }
};

// Per-layer lookup of one net's rectangles: a scan while small, a bucket grid beyond.
class LayerIndex {
 public:
  void add(int e, const std::vector<Element>& elems);
  void remove(int e, const std::vector<Element>& elems);
  // Calls f(e) for entries whose closed rectangle may meet r (each once).
  template <class F>
  void near(const Rect& r, std::vector<std::uint32_t>& stamp, std::uint32_t& clock, F f) const;
  std::size_t size() const { return items_.size(); }
  std::size_t memory() const;

 private:
  static constexpr int kShift = 12;  // 4096 DBU buckets
  static constexpr std::size_t kScan = 24;
  static constexpr i64 kWideCells = 64;
  static std::uint64_t key(i64 cx, i64 cy) {
    return (std::uint64_t(cx) * 0x9E3779B97F4A7C15ull) ^ std::uint64_t(cy);
  }
  static i64 cells(const Rect& r) {
    return ((r.xhi >> kShift) - (r.xlo >> kShift) + 1) * ((r.yhi >> kShift) - (r.ylo >> kShift) + 1);
  }
  void file(int e, const Rect& r);
  std::vector<int> items_;
  std::unordered_map<std::uint64_t, std::vector<int>> grid_;
  std::vector<int> wide_;
  bool gridded_ = false;
};

// One check on one component, with what a what-if or a report needs beside it.
struct Entry {
  int step;
  Measure measure;
  Kind kind;
  int oxide;
  double ratio, limit, utilization;
  int gate;
  double conductor, spent, gate_um2, diff_um2;
};

// An evaluated state (cumulative sums per gate, worst figures per component); built
// once per net version and reused by every question until the net changes.
struct Assessment {
  std::int64_t version = -1;
  int groups = 0, steps = 0;
  std::vector<int> slot_of_pin;        // pin -> row block, or -1 (no gate area)
  std::vector<double> term, car;       // [(slot * groups + g) * steps + s]
  // Only for a net with block pins (State::blocks): the sums without block values
  // (Model::block_car); otherwise car is that sum and chain stays empty.
  std::vector<double> chain;
  std::vector<char> has;               // [slot * groups + g]: the pin has g's oxide
  std::vector<std::vector<double>> comp_worst, partial_worst;  // [s][comp]
  std::vector<std::vector<std::pair<double, int>>> ranked;     // [s]: (worst, comp), worst first
  std::vector<const double*> rows;                             // per pin: its CAR rows, or null
  std::vector<const double*> chain_rows;                       // per pin: its chain rows (= rows without blocks)
  // Per step s, component X and group g (index X * groups + g): the largest CAR at s of
  // X's gates (-1 without one), and the components of the step feeding s that hold X's
  // gates, each with the largest CAR there of its gates, largest first. A what-if reads
  // a component's best cumulative ratio from these instead of walking every gate:
  // rounding is monotone, so max_p fl(t + x_p) = fl(t + max_p x_p).
  std::vector<std::vector<double>> best;                                   // [s][X * groups + g]
  // feeders of (X, g) at step s: feeder_items[s][feeder_start[s][i] .. feeder_start[s][i + 1]),
  // i = X * groups + g (one flat list per step: a list per component would cost more
  // than the figures it holds)
  std::vector<std::vector<std::uint32_t>> feeder_start;
  std::vector<std::vector<std::pair<double, int>>> feeder_items;
  std::vector<double> step_worst, worst_below;                 // worst_below[s]: over steps < s
  std::size_t row(int slot, int g) const { return (std::size_t(slot) * std::size_t(groups) + std::size_t(g)) * std::size_t(steps); }
  double worst_untouched(int s, const std::vector<int>& touched) const;
};

// Buffers a what-if reuses from call to call (a Net answers one question at a time).
struct Scratch {
  struct Cand {
    int layer;
    Rect r;
    int pin;  // extra pin index, -1 for a shape
    bool anchor;
  };
  struct Link {
    int i, j, step;
  };
  std::vector<Cand> cands;
  std::vector<std::vector<std::pair<int, int>>> touches;
  std::vector<Link> links;
  std::vector<std::uint64_t> oxides;
  std::vector<double> extra_gate;
  std::vector<const double*> car_view;  // per pin: its CAR rows as the what-if has them
  std::vector<int> fresh_of;            // per pin: its row block in `fresh`, or -1
  std::vector<int> fresh_pins;          // pins with a fresh row block (to reset fresh_of)
  std::vector<std::vector<double>> fresh;
  std::vector<i128> added;
  std::vector<int> parent, roots, members, group_comps;
  std::vector<std::uint64_t> changed;  // per candidate group root: steps it changed its component at
  std::vector<std::pair<int, int>> first_toucher, seen;
  std::vector<Rect> local, rects_here, with;
  std::vector<Entry> es, before;
  std::vector<double> bests;  // per (measure, oxide) group: a group's best CAR at a step
  // per step: the comps the candidates touched, the groups (by root) with their best
  // CAR per (measure, oxide) group, and each candidate's group index
  std::vector<std::vector<int>> touched_at;
  std::vector<std::vector<double>> group_best;  // [s][group index * groups + g], -1: none
  std::vector<std::vector<int>> group_of_cand;  // [s][candidate] -> group index, -1 absent
  Comp built;
};

// Refuses a pin's block values or rectangle layers the model cannot place
// (std::invalid_argument naming `field`); returns the index of the pin's anchor (its
// first rectangle on its own layer, the lowest).
void check_block_car(const Model& m, const PinSpec& pin, const char* field);
std::size_t check_rect_layers(const Model& m, const PinSpec& pin, const char* field);

struct Net::State {
  State(std::shared_ptr<const Model> model, std::vector<PinSpec> pins);

  std::shared_ptr<const Model> holder;
  const Model& m;
  std::vector<PinSpec> pins;
  std::vector<double> pin_gate;           // G per pin
  std::vector<std::uint64_t> pin_oxides;  // oxide classes with gate area, per pin
  std::vector<int> anchor_of_pin;
  std::vector<std::size_t> anchor_rect;  // per pin: the index of its anchor among its rects
  bool blocks = false;  // a pin carries block values: CAR and chain differ (Model::block_car)
  std::vector<Element> elems;
  std::vector<int> free_elems;
  std::unordered_map<i64, int> by_sid;
  std::vector<std::vector<std::pair<int, int>>> adj;  // element -> (neighbour, step joined)
  std::vector<LayerIndex> index;                      // per layer
  std::vector<std::vector<int>> comp_of;              // [s][element] -> comp, -1 absent
  std::vector<std::vector<Comp>> comps;               // [s] pool
  std::vector<std::vector<int>> free_comps;           // [s]
  std::int64_t version = 0, next_seq = 0;
  std::size_t shapes = 0;
  mutable Assessment assessment;
  mutable Scratch scratch;
  mutable SweepBuffers sweep;
  mutable std::vector<Rect> clipped, with;  // local_delta's
  mutable std::vector<std::uint32_t> stamp;  // per element, for searches
  std::vector<int> part_of;                  // per element, for splitting searches
  mutable std::uint32_t clock = 0;

  // A pin's in-cell conductor on a step's layer: area (cell_um2) or side-wall (cell_side_um2).
  double pin_cell(int p, int step) const;
  double pin_cell_side(int p, int step) const;
  int new_element(const Rect& r, int layer, i64 sid, int pin, bool anchor);
  void touching(int layer, const Rect& r, std::vector<std::pair<int, int>>& out) const;
  // (area, perimeter) that r adds to a union whose rects touching r are `local`.
  Measures local_delta(const Rect& r, const std::vector<Rect>& local, int step) const;
  void routed_on(int layer, const std::vector<std::pair<int, int>>& near, std::vector<Rect>& out) const;
  void own_terms(Comp& c, int e, int step) const;
  int new_comp(int step);
  void insert(int e, const std::vector<std::pair<int, int>>& extra);
  void erase(int e);
  bool split(int s, int ci, const std::vector<int>& near, std::vector<std::vector<int>>& parts);
  void rebuild(Comp& c, const std::vector<int>& members, int step) const;
  const Assessment& assess() const;
  void entries(int s, const Comp& c, bool partial, const double* const* cars_by_pin,
               const std::uint64_t* gate_oxides, std::vector<Entry>& out) const;
  std::uint32_t tick() const;
  void compact();  // capacity back to size (after a bulk add)
  // The what-if (whatif.cpp): figures into `out`; changes only with detail.
  void what_if(const Shape* shapes, std::size_t n, const PinSpec* extra, std::size_t n_extra, bool detail,
               Score& out) const;
  double lean_worst(int s, const Comp& c, bool partial, const std::vector<double>& bests) const;
  void record_change(const Entry& e, const std::vector<Entry>& before, bool one_predecessor, Score& out) const;
};

template <class F>
void LayerIndex::near(const Rect& r, std::vector<std::uint32_t>& stamp, std::uint32_t& clock, F f) const {
  if (!gridded_ || cells(r) > std::max<i64>(kWideCells, i64(items_.size()))) {
    for (int e : items_) f(e);
    return;
  }
  if (++clock == 0) {  // wrapped: old stamps could match again
    std::fill(stamp.begin(), stamp.end(), 0u);
    clock = 1;
  }
  for (int e : wide_) { stamp[std::size_t(e)] = clock; f(e); }
  for (i64 cx = r.xlo >> kShift; cx <= (r.xhi >> kShift); ++cx) {
    for (i64 cy = r.ylo >> kShift; cy <= (r.yhi >> kShift); ++cy) {
      auto it = grid_.find(key(cx, cy));
      if (it == grid_.end()) continue;
      for (int e : it->second) {
        if (stamp[std::size_t(e)] != clock) { stamp[std::size_t(e)] = clock; f(e); }
      }
    }
  }
}

}  // namespace etchguard
