// A component's budget (Net::budget): what an addition to it on one layer does to every
// ratio, as coefficients a router evaluates itself (the Budget structs in core.hpp).
//
// Why it is exact. Let N' be the net with `common` committed, R_s the component of N'
// holding the point at step s, and X an addition on layer L that touches nothing of the
// net but R_L's members (and cuts of R_L, R_L+1 around L). Then at every step the
// components are those of N', X joining R_s from L on; G and D stay, so every limit
// stays. Only R_L's conductor on L changes, A' = A + a (area) or A + p * thickness
// (side), and with it
//   * R_L's partial ratios at L: term(A');
//   * for a cumulative group g whose feeding chain from step s passes through L
//     (Model::in_chain), CAR_s of each gate of R_L: CAR_s - term_L(A) + term_L(A'); gates
//     of R_s outside R_L keep theirs (the ratio of R_s is the largest over its gates).
// Every other ratio of N' keeps its value (rest_worst).
//
// Rounding. spent is read back as CAR_s - term_L(A) and the client adds term_L(A'); the
// what-if sums the chain afresh (t_s + CAR_f ..., then a block pin's own value). With a
// block value (tens to hundreds beside terms of a few units) the two orders round apart
// by a few ulps of CAR: equal to 1e-9 relative (the contract's tolerance), not to the
// bit. A watch is compared exactly and that stays sound: where X does not reach the
// best gate the value is the floor, a CAR copied as is; where it does, the best moves by
// X's term change, far above an ulp.
//
// Which figures the service counts as changes (its what-if walk in whatif.cpp, for the
// candidate common + X against the held net N): at each step the component of each
// group of candidates counts when it is a merge (not exactly one of N's components, or
// a candidate rectangle on that step's layer) or when its best CAR of some (measure,
// oxide) differs from that of its one component in N. R_L always counts (X lies on L).
// R_s above L counts when common merges it, else when one of its best CARs, now a
// function of X (a watch), differs from N's. The other components common makes count
// are fixed: fixed_change. (Counting R_s whenever X moves a term feeding s would count
// it where its best CAR belongs to a gate X does not reach, which the what-if does not.)
#include <algorithm>
#include <cmath>
#include <limits>
#include <memory>
#include <stdexcept>

#include "state.hpp"

namespace etchguard {

namespace {

// Ids of common shapes in the trial state (pins have -1 - index, shapes >= 0).
constexpr i64 kCommonSid = std::numeric_limits<i64>::min() / 2;

bool has_oxide(std::uint64_t oxides, int oxide) { return (oxides >> oxide) & 1u; }

double car_of(const Assessment& a, int pin, int group, int step) {
  return a.car[a.row(a.slot_of_pin[std::size_t(pin)], group) + std::size_t(step)];
}

}  // namespace

Budget Net::budget(int layer, i64 x, i64 y, const Shape* common, std::size_t n_common, const Rect& window) const {
  const State& held = *s_;
  const Model& m = held.m;
  const int steps = m.steps, ng = m.groups_count(), L = layer;
  if (L < 0 || L >= steps) throw std::invalid_argument("layer: unknown layer");
  if (!valid_rect(window)) throw std::invalid_argument("window: empty, inverted or too far");
  for (std::size_t i = 0; i < n_common; ++i) {
    if (common[i].layer < 0 || common[i].layer >= steps) throw std::invalid_argument("common.layer: unknown layer");
    if (!valid_rect(common[i].rect)) throw std::invalid_argument("common.rect: empty, inverted or too far");
  }
  // N': the held state copied, common inserted as if committed (the held net is not touched).
  std::unique_ptr<State> trial;
  std::vector<int> common_elems;
  if (n_common > 0) {
    trial = std::make_unique<State>(held);
    for (std::size_t i = 0; i < n_common; ++i) {
      int e = trial->new_element(common[i].rect, common[i].layer, kCommonSid + i64(i), -1, false);
      trial->insert(e, {});
      common_elems.push_back(e);
    }
  }
  const State& st = trial ? *trial : held;
  Budget b;
  b.layer = L;
  int hit = -1;
  const Rect point{x, y, x, y};
  st.index[std::size_t(L)].near(point, st.stamp, st.clock, [&](int e) {
    const Rect& r = st.elems[std::size_t(e)].r;
    if (hit < 0 && r.xlo <= x && x <= r.xhi && r.ylo <= y && y <= r.yhi) hit = e;
  });
  if (hit < 0) return b;
  b.found = true;
  const Assessment& now = st.assess();
  const Assessment& before = held.assess();
  auto comp_at = [&](int s) { return st.comp_of[std::size_t(s)][std::size_t(hit)]; };
  const int cL = comp_at(L);
  const Comp& RL = st.comps[std::size_t(L)][std::size_t(cL)];
  auto in_RL = [&](int p) { return st.comp_of[std::size_t(L)][std::size_t(st.anchor_of_pin[std::size_t(p)])] == cL; };
  const double inf = std::numeric_limits<double>::infinity();

  // The terms at L, one per (measure, oxide) of R_L's gates that a ratio uses.
  const std::size_t n_ox = m.deck.oxides.size();
  std::vector<int> term_of(2 * n_ox, -1);
  auto term_index = [&](Measure meas, int ox) {
    int& t = term_of[std::size_t(int(meas)) * n_ox + std::size_t(ox)];
    if (t >= 0) return t;
    BudgetTerm bt{};
    bt.measure = meas;
    bt.oxide = ox;
    bt.conductor = m.conductor(L, meas, RL.area, RL.cell_um2, RL.cell_side_um2, RL.perim);
    const bool side_wall = meas == Measure::Side && !m.is_cut[std::size_t(L)];
    bt.per_area = meas == Measure::Area ? 1.0 : 0.0;
    bt.per_perimeter = side_wall ? m.deck.layers[std::size_t(L)].thickness_um : 0.0;
    const RuleSpec* rule = m.rule(L, meas, ox);
    bt.factor = rule ? rule->conductor_factor(RL.D) : 1.0;
    bt.credit = rule ? rule->diode_area_credit * RL.D : 0.0;
    bt.gate = rule ? RL.G + rule->diode_gate_factor * RL.D : RL.G;
    t = int(b.terms.size());
    b.terms.push_back(std::move(bt));
    return t;
  };

  // What common alone makes count, step by step (see the header comment).
  const std::size_t G = std::size_t(ng);
  std::vector<char> lineage_merged(std::size_t(steps), 0);
  std::vector<const double*> rows_now(st.pins.size(), nullptr);
  for (std::size_t p = 0; p < st.pins.size(); ++p)
    if (now.slot_of_pin[p] >= 0) rows_now[p] = &now.car[now.row(now.slot_of_pin[p], 0)];
  std::vector<char> is_common(st.elems.size(), 0);
  for (int e : common_elems) is_common[std::size_t(e)] = 1;
  std::vector<int> seen, held_comps;
  std::vector<Entry> es;
  for (int s = 0; s < steps && !common_elems.empty(); ++s) {
    seen.clear();
    for (int e : common_elems) {
      if (st.elems[std::size_t(e)].layer > s) continue;
      const int c = st.comp_of[std::size_t(s)][std::size_t(e)];
      if (std::find(seen.begin(), seen.end(), c) != seen.end()) continue;
      seen.push_back(c);
      const Comp& R = st.comps[std::size_t(s)][std::size_t(c)];
      bool merged = false;
      held_comps.clear();
      for (int x_e : R.members) {
        if (is_common[std::size_t(x_e)]) {
          merged = merged || st.elems[std::size_t(x_e)].layer == s;
          continue;
        }
        const int hc = held.comp_of[std::size_t(s)][std::size_t(x_e)];
        if (std::find(held_comps.begin(), held_comps.end(), hc) == held_comps.end()) held_comps.push_back(hc);
      }
      merged = merged || held_comps.size() != 1;
      bool moved = false;
      for (int g = 0; g < ng && !merged && !moved; ++g)
        if (has_oxide(R.oxides, m.groups[std::size_t(g)].oxide))
          moved = now.best[std::size_t(s)][std::size_t(c) * G + std::size_t(g)] !=
                  before.best[std::size_t(s)][std::size_t(held_comps[0]) * G + std::size_t(g)];
      const bool lineage = s >= L && c == comp_at(s);
      if (lineage) lineage_merged[std::size_t(s)] = merged;
      if (R.G <= 0 || !(merged || moved) || (lineage && (s == L || !merged))) continue;
      es.clear();
      st.entries(s, R, merged, rows_now.data(), st.pin_oxides.data(), es);
      for (const Entry& en : es)
        if (!lineage || en.kind == Kind::Partial) b.fixed_change = std::max(b.fixed_change, en.utilization);
    }
  }

  // The ratios the addition reaches: R_L's partial ones at L, R_s's cumulative ones.
  if (RL.G > 0) {
    for (const CheckKey& key : m.partial_checks[std::size_t(L)]) {
      if (!has_oxide(RL.oxides, key.oxide)) continue;
      const RuleSpec& rule = m.deck.rules[std::size_t(key.rule)];
      int gate = -1;
      for (int p : RL.gates())
        if (has_oxide(st.pin_oxides[std::size_t(p)], key.oxide) && (gate < 0 || p < gate)) gate = p;
      b.ratios.push_back({L, key.measure, Kind::Partial, key.oxide, rule.partial_limit(RL.D),
                          term_index(key.measure, key.oxide), 0.0, -inf, true, gate});
    }
  }
  // R_s's best CAR for group g as the addition makes it: gates X reaches (R_L's, through
  // L on g's chain) follow the term, the others stay (floor).
  auto reach = [&](const Comp& Rs, int s, int g, BudgetWatch& w, int& gate) {
    const Group& grp = m.groups[std::size_t(g)];
    const bool chain = m.in_chain(L, s, g);
    double best = -1.0;
    w = {s, -1, -inf, -inf, 0.0};
    gate = -1;
    for (int p : Rs.gates()) {
      if (!has_oxide(st.pin_oxides[std::size_t(p)], grp.oxide)) continue;
      const double value = car_of(now, p, g, s);
      if (value > best || (value == best && p < gate)) {
        best = value;
        gate = p;
      }
      if (chain && in_RL(p)) {
        w.term = term_index(grp.measure, grp.oxide);
        w.spent = std::max(w.spent, value - now.term[now.row(now.slot_of_pin[std::size_t(p)], g) + std::size_t(L)]);
      } else {
        w.floor = std::max(w.floor, value);
      }
    }
    if (w.term < 0) w.spent = 0.0;
  };
  for (int s = L; s < steps; ++s) {
    const Comp& Rs = st.comps[std::size_t(s)][std::size_t(comp_at(s))];
    if (Rs.G <= 0) continue;
    const bool always = s == L || lineage_merged[std::size_t(s)] != 0;
    BudgetWatch w{};
    int gate = -1;
    for (const CheckKey& key : m.cumulative_checks[std::size_t(s)]) {
      if (!has_oxide(Rs.oxides, key.oxide)) continue;
      reach(Rs, s, key.group, w, gate);
      b.ratios.push_back({s, key.measure, Kind::Cumulative, key.oxide,
                          m.deck.rules[std::size_t(key.rule)].cumulative_limit(Rs.D), w.term, w.spent, w.floor,
                          always, gate});
    }
    if (always) continue;
    // Not merged: R_s is one component of N (the one holding its members outside common).
    int held_comp = -1;
    for (int e : Rs.members)
      if (!is_common[std::size_t(e)]) {
        held_comp = held.comp_of[std::size_t(s)][std::size_t(e)];
        break;
      }
    for (int g = 0; g < ng; ++g) {
      if (!has_oxide(Rs.oxides, m.groups[std::size_t(g)].oxide)) continue;
      reach(Rs, s, g, w, gate);
      w.held = before.best[std::size_t(s)][std::size_t(held_comp) * G + std::size_t(g)];
      b.watches.push_back(w);
    }
  }

  // Everything else of N', as it is.
  std::vector<int> touched(1);
  for (int s = 0; s < steps; ++s) {
    if (s < L) {
      b.rest_worst = std::max(b.rest_worst, now.step_worst[std::size_t(s)]);
      continue;
    }
    touched[0] = comp_at(s);
    b.rest_worst = std::max(b.rest_worst, now.worst_untouched(s, touched));
    if (s > L) b.rest_worst = std::max(b.rest_worst, now.partial_worst[std::size_t(s)][std::size_t(touched[0])]);
  }
  if (n_common > 0) {
    const Score alone = score(common, n_common, false, CostModel{});
    for (double v : alone.added_area_um2) b.common_added_um2 += v;
  }

  // What a client needs to tell covered candidates: R_L on L, and what would merge.
  const int cL1 = L + 1 < steps ? comp_at(L + 1) : -1;
  for (std::size_t e = 0; e < st.elems.size(); ++e) {
    const Element& el = st.elems[e];
    if (!el.alive || !meets(el.r, window)) continue;
    if (el.layer == L) {
      if (st.comp_of[std::size_t(L)][e] == cL) (el.pin < 0 ? b.own : b.own_pins).push_back(el.r);
      else b.foreign.push_back({L, el.r});
    } else if (std::abs(el.layer - L) == 1 && m.is_cut[std::size_t(el.layer)] != m.is_cut[std::size_t(L)]) {
      const int s = std::max(el.layer, L);
      if (st.comp_of[std::size_t(s)][e] != (s == L ? cL : cL1)) b.foreign.push_back({el.layer, el.r});
    }
  }
  return b;
}

}  // namespace etchguard
