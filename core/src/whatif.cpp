// What-if scoring: the exact effect of candidate shapes (and pins), without committing.
//
// For candidates C, step by step from the lowest candidate layer up: the candidates
// present at step s (layers <= s) are joined, by the contract's contact rules, to each
// other and to the existing components they touch. Each resulting group is a component
// the net would have at step s after the commit; its aggregates are the sums of the
// merged components' (components of one step never overlap, so areas and perimeters
// add) plus the local change the candidates make on layer s. A gate in a group gets
// its cumulative sum recomputed along the feeding chain (CAR_s = PAR_s + CAR_p) with
// the new term at every step where its component changes; groups are monotone in s
// (a candidate joined to a gate at step t is joined to it at every later step), so
// gates outside every group keep their sums. The answer equals a full check after the
// commit, which the tests hold to an independent shapely + networkx reference.
#include <algorithm>
#include <limits>
#include <stdexcept>

#include "state.hpp"

namespace etchguard {

namespace {

int find(std::vector<int>& parent, int i) {
  while (parent[std::size_t(i)] != i) {
    parent[std::size_t(i)] = parent[std::size_t(parent[std::size_t(i)])];
    i = parent[std::size_t(i)];
  }
  return i;
}

// Joins two candidates' groups; `changed` (per group root) holds the steps at which the
// group's component changed, and the joined group has both groups' steps.
void join(std::vector<int>& parent, std::vector<std::uint64_t>& changed, int i, int j) {
  int ri = find(parent, i), rj = find(parent, j);
  if (ri == rj) return;
  parent[std::size_t(ri)] = rj;
  changed[std::size_t(rj)] |= changed[std::size_t(ri)];
}

template <class T>
bool contains(const std::vector<T>& v, const T& x) {
  return std::find(v.begin(), v.end(), x) != v.end();
}

std::uint64_t oxide_mask(const PinSpec& pin, std::size_t oxides, double& total) {
  std::uint64_t ox = 0;
  total = 0.0;
  for (std::size_t o = 0; o < pin.gate_by_oxide.size() && o < oxides; ++o) {
    total += pin.gate_by_oxide[o];
    if (pin.gate_by_oxide[o] > 0 && o < 64) ox |= std::uint64_t(1) << o;
  }
  if (pin.gate_total_um2 >= 0) total = pin.gate_total_um2;
  return ox;
}

}  // namespace

void Net::State::what_if(const Shape* shapes, std::size_t n, const PinSpec* extra, std::size_t n_extra,
                         bool detail, Score& out) const {
  const int steps = m.steps, ng = m.groups_count();
  Scratch& sc = scratch;
  if (n + n_extra == 0) throw std::invalid_argument("candidate: needs at least one shape");
  auto& cands = sc.cands;
  cands.clear();
  for (std::size_t i = 0; i < n; ++i) {
    if (shapes[i].layer < 0 || shapes[i].layer >= steps) throw std::invalid_argument("candidate.layer: unknown layer");
    if (!valid_rect(shapes[i].rect)) throw std::invalid_argument("candidate.rect: empty, inverted or too far");
    cands.push_back({shapes[i].layer, shapes[i].rect, -1, false});
  }
  const std::size_t npins = pins.size(), all_pins = npins + n_extra;
  sc.extra_gate.clear();
  const std::uint64_t* oxides = pin_oxides.data();
  bool trial_blocks = false;
  if (n_extra > 0) {
    sc.oxides.assign(pin_oxides.begin(), pin_oxides.end());
    for (std::size_t j = 0; j < n_extra; ++j) {
      const PinSpec& pin = extra[j];
      if (pin.layer < 0 || pin.layer >= steps) throw std::invalid_argument("extra_pins.layer: unknown layer");
      if (pin.rects.empty()) throw std::invalid_argument("extra_pins.rects: a pin needs a rectangle");
      check_block_car(m, pin, "extra_pins.block_car");
      const std::size_t anchor = check_rect_layers(m, pin, "extra_pins.rect_layers");
      trial_blocks = trial_blocks || !pin.block_car.empty();
      double total = 0.0;
      sc.oxides.push_back(oxide_mask(pin, m.deck.oxides.size(), total));
      sc.extra_gate.push_back(total);
      for (std::size_t q = 0; q < pin.rects.size(); ++q) {
        if (!valid_rect(pin.rects[q])) throw std::invalid_argument("extra_pins.rects: empty, inverted or too far");
        cands.push_back({pin.rect_layer(q), pin.rects[q], int(j), q == anchor});
      }
    }
    oxides = sc.oxides.data();
  }
  const Assessment& a = assess();
  const std::size_t k = cands.size();

  // Contacts: with the net's elements, and among the candidates themselves.
  if (sc.touches.size() < k) sc.touches.resize(k);
  for (std::size_t i = 0; i < k; ++i) touching(cands[i].layer, cands[i].r, sc.touches[i]);
  auto& links = sc.links;
  links.clear();
  int first = steps;
  for (std::size_t i = 0; i < k; ++i) {
    first = std::min(first, cands[i].layer);
    for (std::size_t j = i + 1; j < k; ++j) {
      const auto &ci = cands[i], &cj = cands[j];
      if (ci.pin >= 0 && ci.pin == cj.pin) {  // one pin: one conductor, from the later layer's step
        links.push_back({int(i), int(j), std::max(ci.layer, cj.layer)});
      } else if (ci.layer == cj.layer) {
        if (edge_touch(ci.r, cj.r)) links.push_back({int(i), int(j), ci.layer});
      } else if (std::abs(ci.layer - cj.layer) == 1 &&
                 m.is_cut[std::size_t(ci.layer)] != m.is_cut[std::size_t(cj.layer)]) {
        if (overlap(ci.r, cj.r)) links.push_back({int(i), int(j), std::max(ci.layer, cj.layer)});
      }
    }
  }

  // CAR rows: the held ones, and fresh rows for the gates a group touches. With block
  // values (Model::block_car) a gate's CAR is its chain plus a value of its own, so a
  // group's best CAR is not its best chain plus one term: every gate is then walked
  // (as with detail), and a fresh row holds the chain behind the CAR.
  const bool per_block = blocks || trial_blocks;
  const bool per_gate = detail || per_block;
  const std::size_t row_len = std::size_t(ng) * std::size_t(steps);
  auto& car_view = sc.car_view;
  car_view.assign(a.rows.begin(), a.rows.end());
  car_view.resize(all_pins, nullptr);
  auto& fresh_of = sc.fresh_of;
  if (fresh_of.size() < all_pins) fresh_of.resize(all_pins, -1);
  sc.fresh_pins.clear();
  auto fresh_row = [&](int p) -> double* {
    int& slot = fresh_of[std::size_t(p)];
    if (slot < 0) {
      slot = int(sc.fresh_pins.size());
      sc.fresh_pins.push_back(p);
      if (sc.fresh.size() <= std::size_t(slot)) sc.fresh.emplace_back();
      auto& row = sc.fresh[std::size_t(slot)];
      if (std::size_t(p) < npins && a.rows[std::size_t(p)] != nullptr) {
        row.assign(a.rows[std::size_t(p)], a.rows[std::size_t(p)] + row_len);
        if (per_block) row.insert(row.end(), a.chain_rows[std::size_t(p)], a.chain_rows[std::size_t(p)] + row_len);
      } else {
        row.assign(per_block ? 2 * row_len : row_len, 0.0);
      }
      car_view[std::size_t(p)] = row.data();
    }
    return sc.fresh[std::size_t(slot)].data();
  };
  auto has_group = [&](int p, int g) { return (oxides[std::size_t(p)] >> m.groups[std::size_t(g)].oxide) & 1u; };

  out.added_area_um2.assign(std::size_t(steps), 0.0);
  out.adds_on.assign(std::size_t(steps), 0);
  out.changes.clear();
  auto& added = sc.added;
  added.assign(std::size_t(steps), 0);
  double worst_change = 0.0;
  double worst_net = a.worst_below[std::size_t(first)];
  auto& parent = sc.parent;
  parent.resize(k);
  for (std::size_t i = 0; i < k; ++i) parent[i] = int(i);
  sc.changed.assign(k, 0);
  auto &roots = sc.roots, &members = sc.members, &group_comps = sc.group_comps;
  auto &first_toucher = sc.first_toucher, &seen = sc.seen;
  auto &local = sc.local, &rects_here = sc.rects_here;
  auto &es = sc.es, &before = sc.before;
  const std::size_t G = std::size_t(ng);
  if (sc.touched_at.size() < std::size_t(steps)) {
    sc.touched_at.resize(std::size_t(steps));
    sc.group_best.resize(std::size_t(steps));
    sc.group_of_cand.resize(std::size_t(steps));
  }
  auto& bests = sc.bests;
  for (int s = first; s < steps; ++s) {
    for (const auto& l : links)
      if (l.step == s) join(parent, sc.changed, l.i, l.j);
    const auto& cof = comp_of[std::size_t(s)];
    const auto& pool = comps[std::size_t(s)];
    first_toucher.clear();
    roots.clear();
    for (std::size_t i = 0; i < k; ++i) {
      if (cands[i].layer > s) continue;
      for (const auto& t : sc.touches[i]) {
        if (t.second > s) continue;
        int c = cof[std::size_t(t.first)];
        auto it = std::find_if(first_toucher.begin(), first_toucher.end(), [c](const auto& x) { return x.first == c; });
        if (it == first_toucher.end()) first_toucher.push_back({c, int(i)});
        else join(parent, sc.changed, int(i), it->second);
      }
    }
    auto& group_of = sc.group_of_cand[std::size_t(s)];
    group_of.assign(k, -1);
    for (std::size_t i = 0; i < k; ++i) {
      if (cands[i].layer > s) continue;
      int r = find(parent, int(i));
      auto it = std::find(roots.begin(), roots.end(), r);
      group_of[i] = int(it - roots.begin());
      if (it == roots.end()) roots.push_back(r);
    }
    sc.group_best[std::size_t(s)].assign(roots.size() * G, -1.0);
    auto& touched = sc.touched_at[std::size_t(s)];
    touched.clear();
    for (std::size_t gi = 0; gi < roots.size(); ++gi) {
      const int root = roots[gi];
      members.clear();
      group_comps.clear();
      rects_here.clear();
      bool has_anchor = false;
      int only_shape = -1;
      for (std::size_t i = 0; i < k; ++i) {
        if (cands[i].layer > s || find(parent, int(i)) != root) continue;
        members.push_back(int(i));
        for (const auto& t : sc.touches[i]) {
          if (t.second > s) continue;
          int c = cof[std::size_t(t.first)];
          if (!contains(group_comps, c)) group_comps.push_back(c);
        }
        if (cands[i].pin >= 0 && cands[i].anchor) has_anchor = true;
        if (cands[i].layer == s && cands[i].pin < 0) {
          rects_here.push_back(cands[i].r);
          only_shape = int(i);
        }
      }
      for (int c : group_comps) touched.push_back(c);
      Measures change;
      if (!rects_here.empty()) {
        if (rects_here.size() == 1) {
          routed_on(s, sc.touches[std::size_t(only_shape)], local);
          change = local_delta(rects_here[0], local, s);
        } else {
          seen.clear();
          for (int x : members) {
            if (cands[std::size_t(x)].layer != s || cands[std::size_t(x)].pin >= 0) continue;
            for (const auto& t : sc.touches[std::size_t(x)])
              if (std::find_if(seen.begin(), seen.end(), [&](const auto& y) { return y.first == t.first; }) == seen.end())
                seen.push_back({t.first, 0});
          }
          routed_on(s, seen, local);
          Measures before_u = union_measures(local, sweep);
          sc.with.assign(local.begin(), local.end());
          sc.with.insert(sc.with.end(), rects_here.begin(), rects_here.end());
          Measures after_u = union_measures(sc.with, sweep);
          change.area = after_u.area - before_u.area;
          change.perimeter = m.side_needed[std::size_t(s)] ? after_u.perimeter - before_u.perimeter : 0;
        }
        added[std::size_t(s)] += change.area;
        out.adds_on[std::size_t(s)] = 1;
      }
      const bool merged = group_comps.size() != 1 || !rects_here.empty() || has_anchor;
      const Comp* group;
      if (merged) {
        Comp& built = sc.built;
        built.reset(true);
        for (int c : group_comps) built.absorb_figures(pool[std::size_t(c)]);
        built.area += change.area;
        built.perim += change.perimeter;
        for (int x : members) {
          const auto& cd = cands[std::size_t(x)];
          if (cd.pin < 0 || !cd.anchor) continue;
          const PinSpec& pin = extra[std::size_t(cd.pin)];
          const int p = int(npins) + cd.pin;
          PinFigures& f = built.figures();
          f.gate.add(sc.extra_gate[std::size_t(cd.pin)]);
          f.diff.add(pin.diff_um2);
          f.cell.add(at_step(pin.cell_um2, s));
          f.cell_side.add(at_step(pin.cell_side_um2, s));
          f.pins.push_back(p);
          if (sc.extra_gate[std::size_t(cd.pin)] > 0) f.gates.push_back(p);
          built.oxides |= oxides[std::size_t(p)];
        }
        built.refresh();
        group = &built;
      } else {
        group = &pool[std::size_t(group_comps[0])];
      }
      if (group->G <= 0) continue;
      const int only = merged ? -1 : group_comps[0];
      if (merged) {
        sc.changed[std::size_t(root)] |= s < 64 ? std::uint64_t(1) << s : ~std::uint64_t(0);
      } else {
        // One component as held, no new metal or pin here: its figures at s move only if
        // a step its sums take terms from changed under this group.
        bool reaches = false;
        for (int g = 0; g < ng && !reaches; ++g)
          reaches = ((group->oxides >> m.groups[std::size_t(g)].oxide) & 1u) &&
                    (m.chain_below[std::size_t(s) * G + std::size_t(g)] & sc.changed[std::size_t(root)]);
        if (!reaches) {
          for (int g = 0; g < ng; ++g)
            sc.group_best[std::size_t(s)][gi * G + std::size_t(g)] = a.best[std::size_t(s)][std::size_t(only) * G + std::size_t(g)];
          worst_net = std::max({worst_net, a.partial_worst[std::size_t(s)][std::size_t(only)],
                                a.comp_worst[std::size_t(s)][std::size_t(only)]});
          continue;
        }
      }
      // The group's best CAR per (measure, oxide) group: this step's term (new where the
      // group changed, else the component's own) plus the largest CAR at the feeding
      // step among its gates: the untouched feeding components' (held, largest first)
      // and the candidate groups' there (computed at that step).
      bests.assign(G, -1.0);
      bool moved = false;
      for (int g = 0; g < ng; ++g) {
        if (!((group->oxides >> m.groups[std::size_t(g)].oxide) & 1u)) continue;
        const double t = m.term(s, g, group->area, group->cell_um2, group->cell_side_um2, group->perim, group->G, group->D);
        const int f = m.feeding(s, g);
        double value = t;
        if (f >= 0) {
          double below = 0.0;  // a gate not there yet at f adds 0
          const std::vector<int>* touched_f = f >= first ? &sc.touched_at[std::size_t(f)] : nullptr;
          for (int c : group_comps) {
            const std::size_t at = std::size_t(c) * G + std::size_t(g);
            const auto& starts = a.feeder_start[std::size_t(s)];
            const auto& items = a.feeder_items[std::size_t(s)];
            for (std::uint32_t k = starts[at]; k < starts[at + 1]; ++k) {
              if (touched_f != nullptr && contains(*touched_f, items[k].second)) continue;
              below = std::max(below, items[k].first);
              break;
            }
          }
          if (f >= first) {
            for (int x : members) {
              const int at_f = sc.group_of_cand[std::size_t(f)][std::size_t(x)];
              if (at_f >= 0) below = std::max(below, sc.group_best[std::size_t(f)][std::size_t(at_f) * G + std::size_t(g)]);
            }
          }
          value = t + below;
        }
        bests[std::size_t(g)] = value;
        sc.group_best[std::size_t(s)][gi * G + std::size_t(g)] = value;
        if (!merged && value != a.best[std::size_t(s)][std::size_t(only) * G + std::size_t(g)]) moved = true;
      }
      if (!merged && !moved && !per_block) {
        worst_net = std::max({worst_net, a.partial_worst[std::size_t(s)][std::size_t(only)],
                              a.comp_worst[std::size_t(s)][std::size_t(only)]});
        continue;
      }
      if (!merged) worst_net = std::max(worst_net, a.partial_worst[std::size_t(s)][std::size_t(only)]);
      if (!per_gate) {
        worst_change = std::max(worst_change, lean_worst(s, *group, merged, bests));
        worst_net = std::max(worst_net, worst_change);
        continue;
      }
      // With detail, every gate's sum along the chain: the figures name their gate.
      if (per_block) bests.assign(G, -1.0);  // the group's best CAR, from its gates' own sums
      for (int p : group->gates()) {
        double* row = fresh_row(p);
        double* chain = per_block ? row + row_len : row;
        const PinSpec& spec = std::size_t(p) < npins ? pins[std::size_t(p)] : extra[std::size_t(p) - npins];
        for (int g = 0; g < ng; ++g) {
          if (!has_group(p, g)) continue;
          const double t = m.term(s, g, group->area, group->cell_um2, group->cell_side_um2, group->perim, group->G, group->D);
          const int f = m.feeding(s, g);
          const std::size_t at = std::size_t(g) * std::size_t(steps);
          chain[at + std::size_t(s)] = f >= 0 ? t + chain[at + std::size_t(f)] : t;
          if (per_block) row[at + std::size_t(s)] = spec.block_car.empty() ? chain[at + std::size_t(s)]
                                                                          : chain[at + std::size_t(s)] + m.block_car(spec, s, g);
          if (per_block) bests[std::size_t(g)] = std::max(bests[std::size_t(g)], row[at + std::size_t(s)]);
        }
      }
      if (per_block && !merged) {  // unmoved as the lean walk tells it: no group's best CAR moved
        bool best_moved = false;
        for (int g = 0; g < ng; ++g)
          best_moved = best_moved || bests[std::size_t(g)] != a.best[std::size_t(s)][std::size_t(only) * G + std::size_t(g)];
        if (!best_moved) {
          worst_net = std::max(worst_net, a.comp_worst[std::size_t(s)][std::size_t(only)]);
          continue;
        }
      }
      es.clear();
      entries(s, *group, merged, car_view.data(), oxides, es);
      before.clear();
      if (detail)
        for (int c : group_comps) entries(s, pool[std::size_t(c)], true, a.rows.data(), oxides, before);
      for (const Entry& e : es) {
        if (e.utilization > worst_change) worst_change = e.utilization;
        if (detail) record_change(e, before, group_comps.size() == 1, out);
      }
      worst_net = std::max(worst_net, worst_change);
    }
    worst_net = std::max(worst_net, a.worst_untouched(s, touched));
  }
  for (int p : sc.fresh_pins) fresh_of[std::size_t(p)] = -1;
  for (int s = 0; s < steps; ++s) out.added_area_um2[std::size_t(s)] = double(added[std::size_t(s)]) * m.scale_area;
  out.worst_change_utilization = worst_change;
  out.worst_utilization = worst_net;
  out.legal = is_legal(worst_net);
  out.breaks_limit = !is_legal(worst_change);
}

// The worst utilization of a group's checks at s from its best CAR per (measure, oxide)
// group (the partial checks only where the group changed).
double Net::State::lean_worst(int s, const Comp& c, bool partial, const std::vector<double>& bests) const {
  double worst = 0.0;
  if (partial) {
    for (const CheckKey& key : m.partial_checks[std::size_t(s)]) {
      if (!((c.oxides >> key.oxide) & 1u)) continue;
      const RuleSpec& rule = m.deck.rules[std::size_t(key.rule)];
      double conductor = m.conductor(s, key.measure, c.area, c.cell_um2, c.cell_side_um2, c.perim);
      worst = std::max(worst, utilization(rule.ratio(conductor, c.G, c.D), rule.partial_limit(c.D)));
    }
  }
  for (const CheckKey& key : m.cumulative_checks[std::size_t(s)]) {
    if (!((c.oxides >> key.oxide) & 1u)) continue;
    const RuleSpec& rule = m.deck.rules[std::size_t(key.rule)];
    worst = std::max(worst, utilization(bests[std::size_t(key.group)], rule.cumulative_limit(c.D)));
  }
  return worst;
}

// The change record of an after-entry, unless it is the same component's same figure as
// before (a merge of several components always counts as a change).
void Net::State::record_change(const Entry& e, const std::vector<Entry>& before, bool one_predecessor,
                               Score& out) const {
  const Entry* prior = nullptr;
  for (const Entry& b : before)
    if (b.measure == e.measure && b.kind == e.kind && b.oxide == e.oxide &&
        (prior == nullptr || b.utilization > prior->utilization))
      prior = &b;
  if (one_predecessor && prior != nullptr && prior->ratio == e.ratio && prior->limit == e.limit) return;
  RatioChange rc{};
  rc.after = {e.step, e.measure, e.kind, e.oxide, e.ratio, e.limit, e.utilization, e.gate};
  rc.has_before = prior != nullptr;
  rc.before_ratio = prior ? prior->ratio : 0.0;
  rc.before_utilization = prior ? prior->utilization : 0.0;
  const RuleSpec* rule = m.rule(e.step, e.measure, e.oxide);
  rc.headroom_um2 = rule->headroom(e.limit, e.gate_um2, e.diff_um2, e.spent, e.conductor);
  const LayerSpec& layer = m.deck.layers[std::size_t(e.step)];
  rc.has_length = false;
  if (!layer.cut && e.measure == Measure::Area && layer.wire_width > 0) {
    rc.has_length = true;
    rc.headroom_length_um = rc.headroom_um2 / (double(layer.wire_width) / double(m.deck.dbu_per_micron));
  } else if (!layer.cut && e.measure == Measure::Side && layer.thickness_um > 0) {
    rc.has_length = true;
    rc.headroom_length_um = rc.headroom_um2 / (2.0 * layer.thickness_um);
  }
  out.changes.push_back(rc);
}

double most_excess(const Score& score) {
  double most = -std::numeric_limits<double>::infinity();
  bool first = true;
  for (const RatioChange& c : score.changes) {
    const double over = c.after.ratio - c.after.limit;
    if (first || over > most) most = over;
    first = false;
  }
  return most;
}

Score Net::score(const Shape* shapes, std::size_t n, bool detail, const CostModel& costs,
                 const PinSpec* extra, std::size_t n_extra) const {
  Score out;
  s_->what_if(shapes, n, extra, n_extra, detail, out);
  out.cost = costs.cost(out.worst_change_utilization);
  return out;
}

void Net::score_batch(const Shape* shapes, std::size_t n_shapes, const i64* counts, std::size_t n_candidates,
                      const CostModel& costs, double* worst_change, double* worst, std::uint8_t* legal,
                      std::uint8_t* breaks, double* cost, double* added_um2) const {
  std::size_t total = 0;
  for (std::size_t i = 0; i < n_candidates; ++i) {
    const i64 take = counts ? counts[i] : 1;
    if (take <= 0) throw std::invalid_argument("shape_count: a candidate needs at least one shape");
    total += std::size_t(take);
  }
  if (total != n_shapes) throw std::invalid_argument("shape_count: counts do not match the rows");
  Score sc;
  std::size_t at = 0;
  for (std::size_t i = 0; i < n_candidates; ++i) {
    const std::size_t take = counts ? std::size_t(counts[i]) : 1;
    s_->what_if(shapes + at, take, nullptr, 0, false, sc);
    at += take;
    worst_change[i] = sc.worst_change_utilization;
    worst[i] = sc.worst_utilization;
    legal[i] = sc.legal;
    breaks[i] = sc.breaks_limit;
    cost[i] = costs.cost(sc.worst_change_utilization);
    double sum = 0.0;
    for (double v : sc.added_area_um2) sum += v;
    added_um2[i] = sum;
  }
}

}  // namespace etchguard
