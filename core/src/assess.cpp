// Evaluating a net's state against the deck: per-gate cumulative sums and every check.
//
// CAR_s(g) = PAR_s(C_s(g)) + CAR_p(g), p the step feeding s (Model::feed); a step
// before g's pin exists adds 0, and a step without a rule for the (measure, oxide)
// adds the plain A / G. Built once per net version; every question reuses it.
#include <algorithm>

#include "state.hpp"

namespace etchguard {

double Assessment::worst_untouched(int s, const std::vector<int>& touched) const {
  for (const auto& wc : ranked[std::size_t(s)])
    if (std::find(touched.begin(), touched.end(), wc.second) == touched.end()) return wc.first;
  return 0.0;
}

// Every check of component c at step s. cars_by_slot[p] is the CAR row block of gate
// pin p (groups x steps), so a what-if can hand in its own figures for changed gates.
void Net::State::entries(int s, const Comp& c, bool partial, const double* const* cars_by_slot,
                         const std::uint64_t* gate_oxides, std::vector<Entry>& out) const {
  if (c.G <= 0) return;
  if (partial) {
    for (const CheckKey& key : m.partial_checks[std::size_t(s)]) {
      const std::uint64_t bit = std::uint64_t(1) << key.oxide;
      if (!(c.oxides & bit)) continue;
      const RuleSpec& rule = m.deck.rules[std::size_t(key.rule)];
      double conductor = m.conductor(s, key.measure, c.area, c.cell_um2, c.cell_side_um2, c.perim);
      double ratio = rule.ratio(conductor, c.G, c.D);
      double limit = rule.partial_limit(c.D);
      int gate = -1;
      for (int p : c.gates())
        if ((gate_oxides[p] & bit) && (gate < 0 || p < gate)) gate = p;
      out.push_back({s, key.measure, Kind::Partial, key.oxide, ratio, limit, utilization(ratio, limit), gate,
                     conductor, 0.0, c.G, c.D});
    }
  }
  const std::size_t steps = std::size_t(m.steps);
  for (const CheckKey& key : m.cumulative_checks[std::size_t(s)]) {
    const std::uint64_t bit = std::uint64_t(1) << key.oxide;
    if (!(c.oxides & bit)) continue;
    int best_p = -1;
    double best = -1.0;
    for (int p : c.gates()) {
      if (!(gate_oxides[p] & bit)) continue;
      double value = cars_by_slot[p][std::size_t(key.group) * steps + std::size_t(s)];
      if (value > best || (value == best && p < best_p)) {
        best_p = p;
        best = value;
      }
    }
    const RuleSpec& rule = m.deck.rules[std::size_t(key.rule)];
    double limit = rule.cumulative_limit(c.D);
    double conductor = m.conductor(s, key.measure, c.area, c.cell_um2, c.cell_side_um2, c.perim);
    double term = rule.ratio(conductor, c.G, c.D);
    out.push_back({s, key.measure, Kind::Cumulative, key.oxide, best, limit, utilization(best, limit), best_p,
                   conductor, best - term, c.G, c.D});
  }
}

const Assessment& Net::State::assess() const {
  Assessment& a = assessment;
  if (a.version == version) return a;
  const int n = m.steps, ng = m.groups_count();
  a.version = version;
  a.groups = ng;
  a.steps = n;
  a.slot_of_pin.assign(pins.size(), -1);
  int slots = 0;
  for (std::size_t p = 0; p < pins.size(); ++p)
    if (pin_gate[p] > 0) a.slot_of_pin[p] = slots++;
  a.term.assign(std::size_t(slots) * std::size_t(ng) * std::size_t(n), 0.0);
  a.car.assign(a.term.size(), 0.0);
  a.chain.assign(blocks ? a.term.size() : 0, 0.0);
  a.has.assign(std::size_t(slots) * std::size_t(ng), 0);
  for (std::size_t p = 0; p < pins.size(); ++p) {
    int slot = a.slot_of_pin[p];
    if (slot < 0) continue;
    const int anchor = anchor_of_pin[p];
    for (int g = 0; g < ng; ++g) {
      if (!(pin_oxides[p] & (std::uint64_t(1) << m.groups[std::size_t(g)].oxide))) continue;
      a.has[std::size_t(slot) * std::size_t(ng) + std::size_t(g)] = 1;
      double* term = &a.term[a.row(slot, g)];
      double* car = &a.car[a.row(slot, g)];
      double* chain = blocks ? &a.chain[a.row(slot, g)] : car;
      for (int s = pins[p].layer; s < n; ++s) {
        const Comp& c = comps[std::size_t(s)][std::size_t(comp_of[std::size_t(s)][std::size_t(anchor)])];
        term[s] = m.term(s, g, c.area, c.cell_um2, c.cell_side_um2, c.perim, c.G, c.D);
        int f = m.feeding(s, g);
        chain[s] = f >= 0 ? term[s] + chain[f] : term[s];
        if (blocks) car[s] = pins[p].block_car.empty() ? chain[s] : chain[s] + m.block_car(pins[p], s, g);
      }
    }
  }
  a.rows.assign(pins.size(), nullptr);
  a.chain_rows.assign(pins.size(), nullptr);
  for (std::size_t p = 0; p < pins.size(); ++p) {
    if (a.slot_of_pin[p] < 0) continue;
    a.rows[p] = &a.car[a.row(a.slot_of_pin[p], 0)];
    a.chain_rows[p] = blocks ? &a.chain[a.row(a.slot_of_pin[p], 0)] : a.rows[p];
  }
  const auto& rows = a.rows;
  a.comp_worst.resize(std::size_t(n));
  a.partial_worst.resize(std::size_t(n));
  a.ranked.resize(std::size_t(n));
  a.best.resize(std::size_t(n));
  a.feeder_start.resize(std::size_t(n));
  a.feeder_items.resize(std::size_t(n));
  a.step_worst.assign(std::size_t(n), 0.0);
  a.worst_below.assign(std::size_t(n) + 1, 0.0);
  std::vector<Entry> es;
  for (int s = 0; s < n; ++s) {
    const auto& pool = comps[std::size_t(s)];
    auto& cw = a.comp_worst[std::size_t(s)];
    auto& pw = a.partial_worst[std::size_t(s)];
    auto& ranked = a.ranked[std::size_t(s)];
    cw.assign(pool.size(), 0.0);
    pw.assign(pool.size(), 0.0);
    ranked.clear();
    for (std::size_t ci = 0; ci < pool.size(); ++ci) {
      const Comp& c = pool[ci];
      if (!c.alive || c.G <= 0) continue;
      es.clear();
      entries(s, c, true, rows.data(), pin_oxides.data(), es);
      if (es.empty()) continue;
      double worst = 0.0, partial = 0.0;
      bool first = true;
      for (const Entry& e : es) {
        if (first || e.utilization > worst) worst = e.utilization;
        first = false;
        if (e.kind == Kind::Partial && e.utilization > partial) partial = e.utilization;
      }
      cw[ci] = worst;
      pw[ci] = partial;
      ranked.push_back({worst, int(ci)});
    }
    // Best CAR per component and group, and the feeding step's components under it.
    const std::size_t G = std::size_t(ng);
    auto& best = a.best[std::size_t(s)];
    auto& starts = a.feeder_start[std::size_t(s)];
    auto& items = a.feeder_items[std::size_t(s)];
    best.assign(pool.size() * G, -1.0);
    starts.assign(pool.size() * G + 1, 0);
    items.clear();
    std::vector<std::pair<double, int>> list;
    for (std::size_t ci = 0; ci < pool.size(); ++ci) {
      const Comp& c = pool[ci];
      const bool gated = c.alive && c.G > 0;
      for (int g = 0; g < ng; ++g) {
        starts[ci * G + std::size_t(g)] = std::uint32_t(items.size());
        if (!gated) continue;
        list.clear();
        const int f = m.feeding(s, g);
        for (int p : c.gates()) {
          const int slot = a.slot_of_pin[std::size_t(p)];
          if (!a.has[std::size_t(slot) * G + std::size_t(g)]) continue;
          const double* row = &a.car[a.row(slot, g)];
          double& b = best[ci * G + std::size_t(g)];
          b = std::max(b, row[s]);
          if (f < pins[std::size_t(p)].layer) continue;  // no feeding step, or the pin is not there yet
          list.push_back({row[f], comp_of[std::size_t(f)][std::size_t(anchor_of_pin[std::size_t(p)])]});
        }
        // one entry per feeding component (its largest), largest first
        std::sort(list.begin(), list.end(), [](const auto& x, const auto& y) {
          return x.second != y.second ? x.second < y.second : x.first > y.first;
        });
        list.erase(std::unique(list.begin(), list.end(), [](const auto& x, const auto& y) { return x.second == y.second; }),
                   list.end());
        std::sort(list.begin(), list.end(), [](const auto& x, const auto& y) { return x.first > y.first; });
        items.insert(items.end(), list.begin(), list.end());
      }
    }
    starts[pool.size() * G] = std::uint32_t(items.size());
    std::stable_sort(ranked.begin(), ranked.end(),
                     [](const auto& x, const auto& y) { return x.first > y.first; });
    a.step_worst[std::size_t(s)] = ranked.empty() ? 0.0 : ranked[0].first;
    a.worst_below[std::size_t(s) + 1] = std::max(a.worst_below[std::size_t(s)], a.step_worst[std::size_t(s)]);
  }
  return a;
}

}  // namespace etchguard
