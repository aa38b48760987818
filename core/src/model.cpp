// Compiling a deck, and the ratio formulas of antenna-model.md ("Quantities",
// "Ratios and limits"). Every float operation is written in the order the Python
// face documents, so figures agree to the bit with its arithmetic.
#include "model.hpp"

#include <algorithm>
#include <cmath>
#include <limits>
#include <stdexcept>

namespace etchguard {

double Table::at(double x) const {
  const auto& p = points;
  if (x <= p.front().first) return p.front().second;
  for (std::size_t i = 0; i + 1 < p.size(); ++i) {
    double x0 = p[i].first, y0 = p[i].second, x1 = p[i + 1].first, y1 = p[i + 1].second;
    if (x <= x1) return y0 + (y1 - y0) * (x - x0) / (x1 - x0);
  }
  return p.back().second;
}

static double limit_of(bool has_plain, double plain, const Table& table, double diff) {
  if (diff > 0 && !table.empty()) return table.at(diff);
  if (has_plain) return plain;
  return table.at(diff);
}

double RuleSpec::partial_limit(double diff) const {
  return limit_of(has_partial_max, partial_max, diode_partial_max, diff);
}

double RuleSpec::cumulative_limit(double diff) const {
  return limit_of(has_cumulative_max, cumulative_max, diode_cumulative_max, diff);
}

static double effective_factor(const RuleSpec& r, double diff) {
  double factor = r.area_factor;
  if (r.factor_with_diode_only && diff <= 0) factor = 1.0;
  if (!r.diode_area_reduction.empty()) factor = factor * r.diode_area_reduction.at(diff);
  return factor;
}

double RuleSpec::conductor_factor(double diff) const { return effective_factor(*this, diff); }

double RuleSpec::ratio(double conductor, double gate, double diff) const {
  double a_eff = std::max(0.0, effective_factor(*this, diff) * conductor - diode_area_credit * diff);
  return a_eff / (gate + diode_gate_factor * diff);
}

double RuleSpec::headroom(double limit, double gate, double diff, double spent,
                          double conductor) const {
  // Solves spent + max(0, f*A' - k*D) / G_eff <= limit for A'.
  double factor = effective_factor(*this, diff);
  double g_eff = gate + diode_gate_factor * diff;
  double budget = (limit - spent) * g_eff;
  if (factor <= 0) return budget < 0 ? budget : std::numeric_limits<double>::infinity();
  if (budget < 0) return budget / factor;  // over already by other steps alone
  return (budget + diode_area_credit * diff) / factor - conductor;
}

double CostModel::cost(double u) const {
  if (u <= knee) return 0.0;
  if (u <= 1.0) return scale * std::pow((u - knee) / (1.0 - knee), exponent);
  return violation + scale * over_slope * (u - 1.0);
}

double utilization(double ratio, double limit) {
  if (limit <= 0) return ratio > 0 ? std::numeric_limits<double>::infinity() : 0.0;
  return ratio / limit;
}

Model::Model(const DeckSpec& d) : deck(d) {
  steps = int(deck.layers.size());
  if (steps == 0) throw std::invalid_argument("deck.layers: a deck needs at least one layer");
  if (deck.dbu_per_micron <= 0) throw std::invalid_argument("deck.dbu_per_micron: must be positive");
  if (deck.oxides.empty()) deck.oxides.push_back("thin");
  const double dbu = double(deck.dbu_per_micron);
  scale_area = 1.0 / (dbu * dbu);
  scale_length = 1.0 / dbu;
  const std::size_t n = std::size_t(steps), ox = deck.oxides.size();
  is_cut.resize(n);
  for (std::size_t s = 0; s < n; ++s) is_cut[s] = deck.layers[s].cut;
  rule_index.assign(n * 2 * ox, -1);
  partial_checks.resize(n);
  cumulative_checks.resize(n);
  bool cumulative_side = false;
  std::vector<char> side_rule(n, 0);
  for (std::size_t i = 0; i < deck.rules.size(); ++i) {
    const RuleSpec& r = deck.rules[i];
    if (r.step < 0 || r.step >= steps) throw std::invalid_argument("rules.layer: unknown step");
    if (r.oxide < 0 || std::size_t(r.oxide) >= ox) throw std::invalid_argument("rules.oxide: unknown oxide");
    if (r.measure == Measure::Side && is_cut[std::size_t(r.step)])
      throw std::invalid_argument("rules.measure: a side-wall rule needs a routing layer");
    int& slot = rule_index[(std::size_t(r.step) * 2 + int(r.measure)) * ox + std::size_t(r.oxide)];
    if (slot >= 0) throw std::invalid_argument("rules.layer: a second rule for one (layer, measure, oxide)");
    slot = int(i);
    if (r.measure == Measure::Side) {
      side_rule[std::size_t(r.step)] = 1;
      if (r.has_cumulative()) cumulative_side = true;
    }
    if (r.has_cumulative()) {
      bool seen = false;
      for (const Group& g : groups) seen = seen || (g.measure == r.measure && g.oxide == r.oxide);
      if (!seen) groups.push_back({r.measure, r.oxide});
    }
  }
  std::sort(groups.begin(), groups.end(), [&](const Group& a, const Group& b) {
    if (a.measure != b.measure) return int(a.measure) < int(b.measure);
    return deck.oxides[std::size_t(a.oxide)] < deck.oxides[std::size_t(b.oxide)];
  });
  for (std::size_t i = 0; i < deck.rules.size(); ++i) {
    const RuleSpec& r = deck.rules[i];
    if (r.has_partial()) partial_checks[std::size_t(r.step)].push_back({int(i), r.measure, r.oxide, -1});
    if (r.has_cumulative()) {
      int g = 0;
      while (!(groups[std::size_t(g)].measure == r.measure && groups[std::size_t(g)].oxide == r.oxide)) ++g;
      cumulative_checks[std::size_t(r.step)].push_back({int(i), r.measure, r.oxide, g});
    }
  }
  const std::size_t ng = groups.size();
  term_rule.assign(n * ng, -1);
  feed.assign(n * ng, -1);
  for (std::size_t s = 0; s < n; ++s) {
    for (std::size_t g = 0; g < ng; ++g) {
      const RuleSpec* r = rule(int(s), groups[g].measure, groups[g].oxide);
      term_rule[s * ng + g] = r ? int(r - deck.rules.data()) : -1;
      // The feeding step (the contract's cumulative ratio): side sums chain routing
      // steps only; area sums the step directly below where the layer adds cuts in,
      // else the nearest lower step of the same kind.
      int f = -1;
      bool plus_cut = deck.cumulative_includes_cuts || deck.layers[s].cumulative_plus_cut;
      for (int t = int(s) - 1; t >= 0; --t) {
        bool cut_t = is_cut[std::size_t(t)];
        if (groups[g].measure == Measure::Side ? !cut_t : (plus_cut || cut_t == bool(is_cut[s]))) {
          f = t;
          break;
        }
      }
      feed[s * ng + g] = f;
    }
  }
  chain_below.assign(n * ng, ~std::uint64_t(0));
  if (n <= 64) {
    for (std::size_t s = 0; s < n; ++s) {
      for (std::size_t g = 0; g < ng; ++g) {
        std::uint64_t bits = 0;
        for (int t = feed[s * ng + g]; t >= 0; t = feed[std::size_t(t) * ng + g]) bits |= std::uint64_t(1) << t;
        chain_below[s * ng + g] = bits;
      }
    }
  }
  side_needed.resize(n);
  for (std::size_t s = 0; s < n; ++s) side_needed[s] = !is_cut[s] && (cumulative_side || side_rule[s]);
}

// A block pin's accumulated ratio, per the LEF/DEF 5.8 reference's process antenna
// appendix, hierarchical part (recalled from memory, not fetched: a block pin's
// ANTENNAMAX*CAR value on a layer is the largest cumulative ratio inside the block using
// the metal at or below that layer, the pin's own metal excluded, and serves for the
// cumulative ratio on that layer and the layers above it). So the value is itself a
// cumulative sum: it is not summed down the chain with the other terms. At step s the
// pin's gates get the value of the highest step of s's feeding chain (s, p(s), p(p(s)),
// ...) that the pin gives one for, for the group's measure and oxide; 0 where none:
//   CAR_s(g) = chain_s(g) + H*_s(g),   chain_s(g) = PAR_s(C_s(g)) + chain_p(g)
// (chain_s is the contract's sum without block values; the sum is rounded once, after
// the chain, so a pin without values has CAR = chain exactly).
double Model::block_car(const PinSpec& pin, int s, int g) const {
  if (pin.block_car.empty()) return 0.0;
  const Group& grp = groups[std::size_t(g)];
  for (int t = s; t >= 0; t = feeding(t, g))
    for (const BlockCar& b : pin.block_car)
      if (b.step == t && b.measure == grp.measure && b.oxide == grp.oxide) return b.ratio;
  return 0.0;
}

bool Model::in_chain(int low, int s, int g) const {
  while (s > low) s = feeding(s, g);
  return s == low;
}

double Model::conductor(int step, Measure m, i128 area, double cell, double cell_side, i128 perim) const {
  if (m == Measure::Area) return double(area) * scale_area + cell;
  if (is_cut[std::size_t(step)]) return 0.0;
  return double(perim) * scale_length * deck.layers[std::size_t(step)].thickness_um + cell_side;
}

double Model::term(int step, int g, i128 area, double cell, double cell_side, i128 perim, double gate,
                   double diff) const {
  double a = conductor(step, groups[std::size_t(g)].measure, area, cell, cell_side, perim);
  const RuleSpec* r = factors(step, g);
  if (r == nullptr) return a / gate;
  return r->ratio(a, gate, diff);
}

std::shared_ptr<const Model> compile(const DeckSpec& deck) { return std::make_shared<const Model>(deck); }
int model_steps(const Model& m) { return m.steps; }
int model_groups(const Model& m) { return m.groups_count(); }

}  // namespace etchguard
