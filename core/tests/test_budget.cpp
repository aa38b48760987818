// Shared-part batches and budgets, under the sanitizers (the Python suite holds both to
// the scalar score and to an independent reference; these hold the core's own
// invariants on random nets).
#include <algorithm>
#include <cmath>
#include <random>
#include <stdexcept>
#include <vector>

#include "check.hpp"
#include "etchguard/core.hpp"

using namespace etchguard;

namespace {

// M1 V1 M2 V2 M3 with area rules everywhere and a side rule on M3 (invented, demo only).
DeckSpec three_metal_deck() {
  DeckSpec d;
  d.dbu_per_micron = 1000;
  for (int i = 0; i < 5; ++i) d.layers.push_back({i % 2 == 1, 0.25, i % 2 == 0 ? 100 : 0, false});
  d.oxides = {"thin"};
  for (int s = 0; s < 5; ++s) {
    RuleSpec r;
    r.step = s;
    r.has_partial_max = true;
    r.partial_max = s % 2 ? 15.0 : 300.0;
    r.has_cumulative_max = true;
    r.cumulative_max = s % 2 ? 40.0 : 900.0;
    d.rules.push_back(r);
  }
  RuleSpec side;
  side.step = 4;
  side.measure = Measure::Side;
  side.has_partial_max = true;
  side.partial_max = 350.0;
  d.rules.push_back(side);
  return d;
}

PinSpec pin_with(int layer, Rect r, double gate, double diff) {
  PinSpec p;
  p.layer = layer;
  p.rects = {r};
  p.gate_by_oxide = {gate};
  p.diff_um2 = diff;
  return p;
}

Shape random_shape(std::mt19937_64& rng) {
  std::uniform_int_distribution<int> layer(0, 4), cell(0, 9), len(1, 3);
  i64 x = cell(rng) * 100, y = cell(rng) * 100;
  return {layer(rng), {x, y, x + len(rng) * 100, y + len(rng) * 100}};
}

Net random_net(std::mt19937_64& rng) {
  Net net(compile(three_metal_deck()),
          {pin_with(0, {0, 0, 100, 100}, 0.04, 0.0), pin_with(0, {800, 800, 900, 900}, 0.0, 0.2),
           pin_with(2, {400, 0, 500, 100}, 0.02, 0.0)});
  for (i64 id = 1; id <= 12; ++id) {
    Shape s = random_shape(rng);
    REQUIRE(net.add(id, s.layer, s.rect) == Status::Ok);
  }
  return net;
}

}  // namespace

ETCHGUARD_TEST(shared_parts_equal_candidates_sent_whole) {
  std::mt19937_64 rng(5);
  CostModel costs;
  for (int round = 0; round < 40; ++round) {
    Net net = random_net(rng);
    std::vector<Shape> common, own, whole;
    std::vector<i64> common_counts, counts, part_of, whole_counts;
    for (int k = 0; k < 3; ++k) {
      common_counts.push_back(1 + k);
      for (int j = 0; j <= k; ++j) common.push_back(random_shape(rng));
    }
    for (int i = 0; i < 8; ++i) {
      const i64 part = i64(i % 4) - 1;
      part_of.push_back(part);
      counts.push_back(1 + i % 2);
      std::size_t start = 0;
      for (i64 k = 0; k < part; ++k) start += std::size_t(common_counts[std::size_t(k)]);
      if (part >= 0) whole.insert(whole.end(), common.begin() + long(start), common.begin() + long(start) + common_counts[std::size_t(part)]);
      for (i64 j = 0; j < counts.back(); ++j) {
        own.push_back(random_shape(rng));
        whole.push_back(own.back());
      }
      whole_counts.push_back(counts.back() + (part >= 0 ? common_counts[std::size_t(part)] : 0));
    }
    const std::size_t n = counts.size();
    std::vector<double> a(6 * n), b(6 * n);
    std::vector<std::uint8_t> flags_a(2 * n), flags_b(2 * n);
    net.score_batch_common(own.data(), own.size(), counts.data(), n, common.data(), common.size(),
                           common_counts.data(), common_counts.size(), part_of.data(), costs, &a[0], &a[n],
                           &flags_a[0], &flags_a[n], &a[2 * n], &a[3 * n]);
    net.score_batch(whole.data(), whole.size(), whole_counts.data(), n, costs, &b[0], &b[n], &flags_b[0],
                    &flags_b[n], &b[2 * n], &b[3 * n]);
    for (std::size_t i = 0; i < 4 * n; ++i) CHECK_EQ(a[i], b[i]);
    for (std::size_t i = 0; i < 2 * n; ++i) CHECK_EQ(int(flags_a[i]), int(flags_b[i]));
  }
  Net net = random_net(rng);
  std::vector<Shape> one{random_shape(rng)};
  const i64 one_count = 1, bad_part = 3;
  double out[4];
  std::uint8_t flags[2];
  CHECK_THROWS(net.score_batch_common(one.data(), 1, &one_count, 1, one.data(), 1, &one_count, 1, &bad_part,
                                      CostModel{}, &out[0], &out[1], &flags[0], &flags[1], &out[2], &out[3]),
               std::invalid_argument);
}

// At a = p = 0 a budget's ratios are the ratios the net has with common committed, and
// with every other ratio (rest_worst) they make the net's worst utilization.
ETCHGUARD_TEST(budget_at_zero_is_the_net_with_common) {
  std::mt19937_64 rng(9);
  const Rect everywhere{-(kCoordLimit - 1), -(kCoordLimit - 1), kCoordLimit - 1, kCoordLimit - 1};
  int found = 0;
  for (int round = 0; round < 60; ++round) {
    Net net = random_net(rng);
    std::vector<Shape> common{random_shape(rng), random_shape(rng)};
    const Shape& at = round % 2 ? common[0] : Shape{0, {0, 0, 100, 100}};
    Budget b = net.budget(at.layer, at.rect.xlo, at.rect.ylo, common.data(), common.size(), everywhere);
    REQUIRE(b.found);
    ++found;
    const std::vector<i64> ids{101, 102};
    const std::vector<int> layers{common[0].layer, common[1].layer};
    const std::vector<Rect> rects{common[0].rect, common[1].rect};
    REQUIRE(net.add_many(ids.data(), layers.data(), rects.data(), 2) == Status::Ok);
    const Report after = net.check();
    double worst = b.rest_worst;
    for (const BudgetRatio& r : b.ratios) {
      double value = r.floor;
      if (r.term >= 0) {
        const BudgetTerm& t = b.terms[std::size_t(r.term)];
        value = std::max(r.floor, r.spent + std::max(0.0, t.factor * t.conductor - t.credit) / t.gate);
      }
      worst = std::max(worst, utilization(value, r.limit));
      // the ratio is at most the net's worst case of its kind at its step
      for (const Check& c : after.checks)
        if (c.step == r.step && c.measure == r.measure && c.kind == r.kind && c.oxide == r.oxide)
          CHECK(value <= c.ratio * (1 + 1e-12) + 1e-15);
    }
    CHECK(std::fabs(worst - after.worst_utilization) <= 1e-12 * std::max(1.0, after.worst_utilization));
    REQUIRE(net.remove(ids.data(), ids.size()) == Status::Ok);
  }
  CHECK(found > 0);
  // Without common, an addition of nothing moves no watch: each is its held best CAR
  // to the bit (a client compares them exactly; a zero-area candidate inside the
  // component's own metal is one).
  int watched = 0;
  for (int round = 0; round < 60; ++round) {
    Net held = random_net(rng);
    Budget b = held.budget(0, 0, 0, nullptr, 0, everywhere);
    for (const BudgetWatch& w : b.watches) {
      double value = w.floor;
      if (w.term >= 0) {
        const BudgetTerm& t = b.terms[std::size_t(w.term)];
        value = std::max(w.floor, w.spent + std::max(0.0, t.factor * t.conductor - t.credit) / t.gate);
      }
      CHECK(value == w.held);
      ++watched;
    }
  }
  CHECK(watched > 0);
  Net net = random_net(rng);
  CHECK_THROWS(net.budget(9, 0, 0, nullptr, 0, everywhere), std::invalid_argument);
  CHECK_THROWS(net.budget(0, 0, 0, nullptr, 0, Rect{5, 0, 5, 9}), std::invalid_argument);
  CHECK(!net.budget(4, -5000, -5000, nullptr, 0, everywhere).found);
}
