// The core's own checks, run under AddressSanitizer and UndefinedBehaviorSanitizer by
// `make test` (tests/test_core_native.py). The Python suite holds the core to the
// independent shapely + networkx reference; these hold its own invariants: hand-worked
// union measures, order-independent sums, add + remove restoring every figure, and a
// what-if equal to the check after the commit, on random nets.
#include <algorithm>
#include <cmath>
#include <cstdint>
#include <limits>
#include <random>
#include <stdexcept>
#include <vector>

#include "check.hpp"
#include "etchguard/core.hpp"
#include "../src/exact_sum.hpp"
#include "../src/geometry.hpp"

using namespace etchguard;

namespace {

// A small demo deck: M1 V1 M2 V2 M3, area rules on every layer, a side rule on M2,
// a diode table on M1 (invented values, demo only).
DeckSpec demo_deck(bool plus_cut_on_m2 = false) {
  DeckSpec d;
  d.dbu_per_micron = 1000;
  for (int i = 0; i < 5; ++i) d.layers.push_back({i % 2 == 1, 0.3, i % 2 == 0 ? 200 : 0, false});
  d.layers[2].cumulative_plus_cut = plus_cut_on_m2;
  d.oxides = {"thin"};
  for (int s = 0; s < 5; ++s) {
    RuleSpec r;
    r.step = s;
    r.has_partial_max = true;
    r.partial_max = s % 2 ? 20.0 : 400.0;
    r.has_cumulative_max = true;
    r.cumulative_max = s % 2 ? 60.0 : 1200.0;
    if (s == 0) r.diode_partial_max.points = {{0.0, 400.0}, {0.5, 4000.0}};
    d.rules.push_back(r);
  }
  RuleSpec side;
  side.step = 2;
  side.measure = Measure::Side;
  side.has_partial_max = true;
  side.partial_max = 500.0;
  side.has_cumulative_max = true;
  side.cumulative_max = 900.0;
  d.rules.push_back(side);
  return d;
}

PinSpec gate_pin(int layer, Rect r, double gate) {
  PinSpec p;
  p.layer = layer;
  p.rects = {r};
  p.gate_by_oxide = {gate};
  return p;
}

// A gate pin with in-cell conductor on M1 and M2 (area) and in-cell side wall on M2;
// with `block`, a block pin's accumulated ratios on M1 (area) and M2 (side).
PinSpec cell_pin(int layer, Rect r, double gate, bool block = false) {
  PinSpec p = gate_pin(layer, r, gate);
  p.cell_um2 = {{0, 0.01}, {2, 0.02}};
  p.cell_side_um2 = {{2, 0.03}};
  if (block) p.block_car = {{0, Measure::Area, 0, 3.0}, {2, Measure::Side, 0, 1.5}};
  if (block && layer == 0) {  // a shape on M2 too
    p.rects.push_back({r.xlo + 200, r.ylo, r.xhi + 200, r.yhi});
    p.rect_layers = {0, 2};
  }
  return p;
}

bool same_report(const Report& a, const Report& b) {
  if (a.worst_utilization != b.worst_utilization || a.legal != b.legal || a.checks.size() != b.checks.size())
    return false;
  for (std::size_t i = 0; i < a.checks.size(); ++i) {
    const Check &x = a.checks[i], &y = b.checks[i];
    if (x.step != y.step || x.measure != y.measure || x.kind != y.kind || x.ratio != y.ratio ||
        x.limit != y.limit || x.gate != y.gate)
      return false;
  }
  return true;
}

Rect random_rect(std::mt19937_64& rng, int grid) {
  std::uniform_int_distribution<int> cell(0, 8), len(1, 4);
  i64 x = cell(rng) * grid, y = cell(rng) * grid;
  return {x, y, x + len(rng) * grid, y + len(rng) * grid};
}

}  // namespace

// -- geometry: hand-worked unions --------------------------------------------------------

ETCHGUARD_TEST(union_of_two_overlapping_squares) {
  // [0,2]^2 and [1,3]^2: 4 + 4 - 1 = 7; the outline is an L-shaped octagon of 12.
  Measures m = union_measures({{0, 0, 2, 2}, {1, 1, 3, 3}});
  CHECK_EQ(m.area, i128(7));
  CHECK_EQ(m.perimeter, i128(12));
}

ETCHGUARD_TEST(union_of_a_ring_counts_the_hole) {
  // A 3x3 ring of four bars around a 1x1 hole: area 8, outer 12 + hole 4.
  Measures m = union_measures({{0, 0, 3, 1}, {0, 2, 3, 3}, {0, 1, 1, 2}, {2, 1, 3, 2}});
  CHECK_EQ(m.area, i128(8));
  CHECK_EQ(m.perimeter, i128(16));
}

ETCHGUARD_TEST(abutting_rects_share_no_boundary) {
  Measures m = union_measures({{0, 0, 2, 1}, {2, 0, 4, 1}});
  CHECK_EQ(m.area, i128(4));
  CHECK_EQ(m.perimeter, i128(10));
}

ETCHGUARD_TEST(far_coordinates_do_not_overflow) {
  const i64 far = kCoordLimit - 1;
  Measures m = union_measures({{-far, -far, far, far}, {0, 0, 1, 1}});
  CHECK_EQ(m.area, i128(2 * far) * i128(2 * far));
  CHECK_EQ(m.perimeter, i128(8) * i128(far));
}

ETCHGUARD_TEST(contact_rules) {
  CHECK(edge_touch({0, 0, 1, 1}, {1, 0, 2, 1}));   // a shared edge connects
  CHECK(!edge_touch({0, 0, 1, 1}, {1, 1, 2, 2}));  // a corner point does not
  CHECK(!overlap({0, 0, 1, 1}, {1, 0, 2, 1}));     // a cut needs area
}

// -- exact sums ------------------------------------------------------------------------------

ETCHGUARD_TEST(exact_sum_is_order_independent) {
  // 1e16 + 1 + (-1e16) loses the 1 in plain float addition; the exact sum keeps it.
  ExactSum a, b;
  for (double x : {1e16, 1.0, -1e16}) a.add(x);
  for (double x : {-1e16, 1e16, 1.0}) b.add(x);
  CHECK_EQ(a.value(), 1.0);
  CHECK_EQ(b.value(), 1.0);
  ExactSum c;
  for (double x : {0.1, 0.2, 0.3}) c.add(x);
  CHECK_EQ(c.value(), 0.6);  // math.fsum([0.1, 0.2, 0.3]) == 0.6; 0.1 + 0.2 + 0.3 is not
}

// -- tables and limits ---------------------------------------------------------------------

ETCHGUARD_TEST(table_is_linear_between_points_and_held_beyond) {
  Table t{{{0.0, 400.0}, {0.5, 4000.0}}};
  CHECK_EQ(t.at(-1.0), 400.0);
  CHECK_EQ(t.at(0.25), 2200.0);
  CHECK_EQ(t.at(9.0), 4000.0);
}

ETCHGUARD_TEST(feeding_chain_with_plus_cut) {
  // With cumulative_plus_cut on M2, CAR_M2 = PAR_M2 + CAR_V1 and CAR_V1 = PAR_V1 (no
  // cut below it): M1's term leaves M2's sum. Check through a net: gate on M1, metal
  // on M1 and M2 only through a via.
  for (bool plus : {false, true}) {
    auto model = compile(demo_deck(plus));
    Net net(model, {gate_pin(0, {0, 0, 200, 200}, 1.0)});
    Rect m1{0, 0, 10000, 200}, v1{0, 0, 200, 200}, m2{0, 0, 200, 5000};
    REQUIRE(net.add(1, 0, m1) == Status::Ok);
    REQUIRE(net.add(2, 1, v1) == Status::Ok);
    REQUIRE(net.add(3, 2, m2) == Status::Ok);
    Report r = net.check();
    double car_m2 = -1;
    for (const Check& c : r.checks)
      if (c.step == 2 && c.kind == Kind::Cumulative && c.measure == Measure::Area) car_m2 = c.ratio;
    // PAR_M1 = 10000*200 / 1e6 / 1 = 2.0; PAR_V1 = 0.04; PAR_M2 = 200*5000/1e6 = 1.0
    CHECK_EQ(car_m2, plus ? 1.0 + 0.04 : 1.0 + 2.0);
  }
}

// -- net state: add, remove, what-if --------------------------------------------------------

ETCHGUARD_TEST(add_then_remove_restores_every_figure) {
  std::mt19937_64 rng(7);
  for (int round = 0; round < 40; ++round) {
    auto model = compile(demo_deck(round % 2 == 1));
    std::vector<PinSpec> pins{cell_pin(0, {0, 0, 100, 100}, 0.05, round % 3 == 1),
                              gate_pin(2, {300, 300, 400, 400}, 0.02)};
    PinSpec driver;
    driver.layer = 0;
    driver.rects = {{800, 0, 900, 100}};
    driver.gate_by_oxide = {0.0};
    driver.diff_um2 = 0.1;
    pins.push_back(driver);
    Net net(model, pins);
    std::uniform_int_distribution<int> layer(0, 4);
    for (i64 id = 1; id <= 12; ++id) REQUIRE(net.add(id, layer(rng), random_rect(rng, 100)) == Status::Ok);
    Report before = net.check();
    std::vector<i64> added;
    for (i64 id = 100; id < 106; ++id) {
      REQUIRE(net.add(id, layer(rng), random_rect(rng, 100)) == Status::Ok);
      added.push_back(id);
    }
    std::shuffle(added.begin(), added.end(), rng);
    for (i64 id : added) REQUIRE(net.remove(&id, 1) == Status::Ok);
    CHECK(same_report(before, net.check()));
  }
}

ETCHGUARD_TEST(what_if_equals_check_after_the_commit) {
  std::mt19937_64 rng(11);
  CostModel costs;
  for (int round = 0; round < 60; ++round) {
    auto model = compile(demo_deck(round % 3 == 0));
    Net net(model, {gate_pin(0, {0, 0, 100, 100}, 0.05), cell_pin(2, {300, 300, 400, 400}, 0.01, round % 2 == 1)});
    std::uniform_int_distribution<int> layer(0, 4), count(1, 4);
    for (i64 id = 1; id <= 10; ++id) REQUIRE(net.add(id, layer(rng), random_rect(rng, 100)) == Status::Ok);
    for (int c = 0; c < 10; ++c) {
      std::vector<Shape> cand;
      for (int k = count(rng); k > 0; --k) cand.push_back({layer(rng), random_rect(rng, 100)});
      Score lean = net.score(cand.data(), cand.size(), false, costs);
      Score full = net.score(cand.data(), cand.size(), true, costs);
      CHECK_EQ(lean.worst_utilization, full.worst_utilization);
      CHECK_EQ(lean.worst_change_utilization, full.worst_change_utilization);
      std::vector<i64> ids;
      for (std::size_t k = 0; k < cand.size(); ++k) {
        ids.push_back(1000 + i64(k));
        REQUIRE(net.add(ids.back(), cand[k].layer, cand[k].rect) == Status::Ok);
      }
      Report after = net.check();
      CHECK_EQ(lean.worst_utilization, after.worst_utilization);
      CHECK_EQ(lean.legal, after.legal);
      REQUIRE(net.remove(ids.data(), ids.size()) == Status::Ok);
    }
  }
}

ETCHGUARD_TEST(most_excess_is_the_largest_ratio_less_limit_of_the_changes) {
  Score none;
  CHECK(std::isinf(most_excess(none)) && most_excess(none) < 0);
  CostModel costs;
  auto model = compile(demo_deck());
  Net net(model, {gate_pin(0, {0, 0, 100, 100}, 0.05)});
  int with_changes = 0, over = 0;
  for (int c = 0; c < 40; ++c) {  // M1 runs from the gate, from well inside the limits to past them
    Shape cand{0, {0, 0, 100 + 7000 * i64(c), 100}};
    Score full = net.score(&cand, 1, true, costs);
    double want = -std::numeric_limits<double>::infinity();
    for (const RatioChange& ch : full.changes) want = std::max(want, ch.after.ratio - ch.after.limit);
    CHECK_EQ(most_excess(full), want);
    with_changes += full.changes.empty() ? 0 : 1;
    over += most_excess(full) > 0 ? 1 : 0;
  }
  CHECK(over > 0 && over < with_changes);
  Score first_nan;  // a NaN first change is kept, as the Python search's max keeps it
  first_nan.changes.resize(2);
  first_nan.changes[0].after.ratio = std::nan("");
  first_nan.changes[1].after.ratio = 1.0;
  CHECK(std::isnan(most_excess(first_nan)));
}

ETCHGUARD_TEST(in_cell_side_wall_adds_to_the_side_measure) {
  // M2 (thickness 0.3 um) run 0..1000 x 0..200 DBU: perimeter 2.4 um x 0.3 = 0.72 um^2
  // of side wall, plus the pin's in-cell 0.03 = 0.75; G = 0.05: PAR_side = 15. The area
  // measure takes the in-cell area 0.02 instead: (0.2 + 0.02) / 0.05 = 4.4.
  auto model = compile(demo_deck());
  Net net(model, {cell_pin(2, {0, 0, 100, 100}, 0.05)});
  REQUIRE(net.add(1, 2, {0, 0, 1000, 200}) == Status::Ok);
  Report r = net.check();
  bool side = false, area = false;
  for (const Check& c : r.checks) {
    if (c.step != 2 || c.kind != Kind::Partial) continue;
    if (c.measure == Measure::Side) side = std::abs(c.ratio - 15.0) < 1e-9;
    if (c.measure == Measure::Area) area = std::abs(c.ratio - 4.4) < 1e-9;
  }
  CHECK(side);
  CHECK(area);
}

ETCHGUARD_TEST(block_ratio_is_carried_up_the_chain_not_summed) {
  // A block pin on M1 (G = 0.05) with 3.0 on M1 (area). M1 run 0..1000 x 0..200 DBU =
  // 0.2 um^2 (+ in-cell 0.01): term 4.2; CAR_M1 = 4.2 + 3 = 7.2. A V1 and an M2 pad
  // 200 x 200 (0.04 + in-cell 0.02): term 1.2; CAR_M2 = (4.2 + 1.2) + 3 (M1's value
  // serves M2, once) = 8.4.
  auto model = compile(demo_deck());
  Net net(model, {cell_pin(0, {0, 0, 100, 100}, 0.05, true)});
  REQUIRE(net.add(1, 0, {0, 0, 1000, 200}) == Status::Ok);
  REQUIRE(net.add(2, 1, {0, 0, 200, 200}) == Status::Ok);
  REQUIRE(net.add(3, 2, {0, 0, 200, 200}) == Status::Ok);
  Report r = net.check();
  bool m1 = false, m2 = false;
  for (const Check& c : r.checks) {
    if (c.kind != Kind::Cumulative || c.measure != Measure::Area) continue;
    if (c.step == 0) m1 = std::abs(c.ratio - 7.2) < 1e-9;
    if (c.step == 2) m2 = std::abs(c.ratio - 8.4) < 1e-9;
  }
  CHECK(m1);
  CHECK(m2);
  PinSpec bad = gate_pin(0, {0, 0, 100, 100}, 0.05);
  bad.block_car = {{9, Measure::Area, 0, 1.0}};
  CHECK_THROWS(Net(model, {bad}), std::invalid_argument);
}

ETCHGUARD_TEST(pin_on_two_layers_connects_at_each_from_its_step) {
  // A pin (G = 0.05) on M1 at the origin and on M2 far away (one conductor in the cell).
  // An M2 run 200 x 2000 DBU = 0.4 um^2 touches only the pin's M2 shape: at M1 it does
  // not exist; at M2 it is the gate's: PAR_M2 = 0.4 / 0.05 = 8.
  auto model = compile(demo_deck());
  PinSpec pin = gate_pin(0, {0, 0, 100, 100}, 0.05);
  pin.rects.push_back({5000, 0, 5200, 200});
  pin.rect_layers = {0, 2};
  Net net(model, {pin});
  REQUIRE(net.add(1, 2, {5000, 0, 5200, 2000}) == Status::Ok);
  bool m2 = false;
  for (const Check& c : net.check().checks)
    if (c.step == 2 && c.kind == Kind::Partial && c.measure == Measure::Area) m2 = std::abs(c.ratio - 8.0) < 1e-9;
  CHECK(m2);
  CostModel costs;
  Shape more{2, {5000, 2000, 5200, 4000}};
  Score s = net.score(&more, 1, false, costs);
  REQUIRE(net.add(2, 2, more.rect) == Status::Ok);
  CHECK_EQ(s.worst_utilization, net.check().worst_utilization);
  PinSpec bad = pin;
  bad.layer = 2;  // not the lowest of its rectangles' layers
  CHECK_THROWS(Net(model, {bad}), std::invalid_argument);
}

ETCHGUARD_TEST(refusals_change_nothing) {
  auto model = compile(demo_deck());
  Net net(model, {gate_pin(0, {0, 0, 100, 100}, 0.05)});
  REQUIRE(net.add(1, 0, {0, 0, 5000, 100}) == Status::Ok);
  Report before = net.check();
  i64 ids[2] = {2, 2};
  int layers[2] = {0, 0};
  Rect rects[2] = {{0, 0, 10, 10}, {0, 0, 10, 10}};
  CHECK(net.add_many(ids, layers, rects, 2) == Status::DuplicateId);
  CHECK(net.add(3, 9, {0, 0, 1, 1}) == Status::BadLayer);
  CHECK(net.add(3, 0, {5, 0, 1, 1}) == Status::BadRect);
  CHECK(net.add(3, 0, {0, 0, kCoordLimit, 1}) == Status::BadRect);
  i64 gone[2] = {1, 77};
  CHECK(net.remove(gone, 2) == Status::UnknownId);
  CHECK_EQ(net.shape_count(), std::size_t(1));
  CHECK(same_report(before, net.check()));
  Shape bad{0, {3, 3, 1, 1}};
  CostModel costs;
  CHECK_THROWS(net.score(&bad, 1, false, costs), std::invalid_argument);
  Shape far_layer{42, {0, 0, 1, 1}};
  CHECK_THROWS(net.score(&far_layer, 1, false, costs), std::invalid_argument);
}

ETCHGUARD_TEST(large_net_split_and_merge) {
  // A comb of 400 M1 teeth on a spine: removing the spine splits it into 400 parts;
  // adding it back restores the figures.
  auto model = compile(demo_deck());
  Net net(model, {gate_pin(0, {0, 0, 100, 100}, 0.5)});
  REQUIRE(net.add(1, 0, {0, 0, 400 * 300, 100}) == Status::Ok);
  for (i64 t = 0; t < 400; ++t) REQUIRE(net.add(10 + t, 0, {t * 300, 100, t * 300 + 100, 2000}) == Status::Ok);
  Report before = net.check();
  i64 spine = 1;
  REQUIRE(net.remove(&spine, 1) == Status::Ok);
  Report split = net.check();
  CHECK(split.worst_utilization < before.worst_utilization);
  REQUIRE(net.add(1, 0, {0, 0, 400 * 300, 100}) == Status::Ok);
  CHECK(same_report(before, net.check()));
}

ETCHGUARD_TEST(removals_anywhere_equal_a_net_built_from_what_remains) {
  // Random nets on a coarse grid (so shapes touch, abut, overlap and split often); shapes
  // removed one at a time from anywhere; after each removal the held net's check equals
  // that of a net built afresh from the shapes that remain, to the bit.
  std::mt19937_64 rng(23);
  for (int round = 0; round < 60; ++round) {
    auto model = compile(demo_deck(round % 2 == 0));
    std::vector<PinSpec> pins{gate_pin(0, {0, 0, 100, 100}, 0.05), gate_pin(0, {500, 500, 600, 600}, 0.02),
                              gate_pin(2, {300, 0, 400, 100}, 0.03)};
    Net net(model, pins);
    std::uniform_int_distribution<int> layer(0, 4);
    std::vector<std::pair<i64, Shape>> held;
    for (i64 id = 1; id <= 24; ++id) {
      Shape sh{layer(rng), random_rect(rng, 100)};
      REQUIRE(net.add(id, sh.layer, sh.rect) == Status::Ok);
      held.push_back({id, sh});
    }
    std::shuffle(held.begin(), held.end(), rng);
    while (held.size() > 4) {
      i64 id = held.back().first;
      held.pop_back();
      REQUIRE(net.remove(&id, 1) == Status::Ok);
      Net fresh(model, pins);
      for (const auto& h : held) REQUIRE(fresh.add(h.first, h.second.layer, h.second.rect) == Status::Ok);
      CHECK(same_report(net.check(), fresh.check()));
    }
  }
}
