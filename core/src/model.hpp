// The compiled deck: flat per-step lookups so that no question searches rules.
#pragma once

#include <string>
#include <vector>

#include "etchguard/core.hpp"

namespace etchguard {

struct CheckKey {
  int rule;  // index into Model::deck.rules
  Measure measure;
  int oxide;
  int group;  // (measure, oxide) group of a cumulative check; -1 for a partial one
};

struct Group {
  Measure measure;
  int oxide;
};

class Model {
 public:
  explicit Model(const DeckSpec& deck);

  DeckSpec deck;
  int steps = 0;
  double scale_area = 0.0;    // um^2 per DBU^2
  double scale_length = 0.0;  // um per DBU
  std::vector<char> is_cut, side_needed;
  std::vector<std::vector<CheckKey>> partial_checks, cumulative_checks;  // per step
  std::vector<Group> groups;        // sorted by (measure, oxide name)
  std::vector<int> term_rule;       // [step * groups + g]: rule giving the factors, or -1
  std::vector<int> feed;            // [step * groups + g]: the step feeding the CAR, or -1
  // [step * groups + g]: the steps below `step` its CAR takes terms from, one bit each
  // (all bits set when the deck has more than 64 steps: a what-if then looks every time)
  std::vector<std::uint64_t> chain_below;
  std::vector<int> rule_index;      // [(step * 2 + measure) * oxides + oxide] -> rule or -1

  const RuleSpec* rule(int step, Measure m, int oxide) const {
    int r = rule_index[(std::size_t(step) * 2 + int(m)) * deck.oxides.size() + std::size_t(oxide)];
    return r < 0 ? nullptr : &deck.rules[std::size_t(r)];
  }
  int groups_count() const { return int(groups.size()); }
  int feeding(int step, int g) const { return feed[std::size_t(step) * groups.size() + std::size_t(g)]; }
  const RuleSpec* factors(int step, int g) const {
    int r = term_rule[std::size_t(step) * groups.size() + std::size_t(g)];
    return r < 0 ? nullptr : &deck.rules[std::size_t(r)];
  }
  // What a block pin adds to its gates' CAR at step s for group g (see model.cpp).
  double block_car(const PinSpec& pin, int s, int g) const;
  // Whether a change of step `low`'s term reaches CAR at step `s` for group g.
  bool in_chain(int low, int s, int g) const;

  // A of a component on layer `step`: um^2 (area) or side-wall um^2 (side); the pins'
  // in-cell conductor on the layer (cell_um2 for the area, cell_side_um2 for the side
  // measure) is added to the routed union's.
  double conductor(int step, Measure m, i128 area_dbu2, double cell_um2, double cell_side_um2,
                   i128 perim_dbu) const;
  // Step `step`'s term of a cumulative sum for group g.
  double term(int step, int g, i128 area_dbu2, double cell_um2, double cell_side_um2, i128 perim_dbu, double gate_um2,
              double diff_um2) const;
};

}  // namespace etchguard
