// Net state: elements, per-layer lookup, components at every step, add and remove.
#include <algorithm>
#include <cmath>
#include <string>
#include <stdexcept>

#include "state.hpp"

namespace etchguard {

// -- components ----------------------------------------------------------------------

void Comp::absorb(const Comp& o) {
  members.insert(members.end(), o.members.begin(), o.members.end());
  absorb_figures(o);
  if (o.figures_) {
    auto& mine = figures_->pins;
    mine.insert(mine.end(), o.figures_->pins.begin(), o.figures_->pins.end());
  }
}

void Comp::absorb_figures(const Comp& o) {
  area += o.area;
  perim += o.perim;
  if (o.figures_) {
    PinFigures& f = figures();
    f.gates.insert(f.gates.end(), o.figures_->gates.begin(), o.figures_->gates.end());
    f.gate.add(o.figures_->gate);
    f.diff.add(o.figures_->diff);
    f.cell.add(o.figures_->cell);
    f.cell_side.add(o.figures_->cell_side);
    oxides |= o.oxides;
    refresh();
  }
}

void Comp::reset(bool keep) {
  members.clear();
  if (keep && figures_) {
    figures_->gates.clear();
    figures_->pins.clear();
    figures_->gate.clear();
    figures_->diff.clear();
    figures_->cell.clear();
    figures_->cell_side.clear();
  } else {
    figures_.reset();
  }
  G = D = cell_um2 = cell_side_um2 = 0.0;
  area = perim = 0;
  oxides = 0;
  alive = false;
}

// -- per-layer index -----------------------------------------------------------------

void LayerIndex::file(int e, const Rect& r) {
  if (cells(r) > kWideCells) {
    wide_.push_back(e);
    return;
  }
  for (i64 cx = r.xlo >> kShift; cx <= (r.xhi >> kShift); ++cx)
    for (i64 cy = r.ylo >> kShift; cy <= (r.yhi >> kShift); ++cy) grid_[key(cx, cy)].push_back(e);
}

void LayerIndex::add(int e, const std::vector<Element>& elems) {
  items_.push_back(e);
  if (gridded_) {
    file(e, elems[std::size_t(e)].r);
  } else if (items_.size() > kScan) {
    gridded_ = true;
    for (int x : items_) file(x, elems[std::size_t(x)].r);
  }
}

static void drop(std::vector<int>& v, int e) {
  auto it = std::find(v.begin(), v.end(), e);
  if (it != v.end()) {
    *it = v.back();
    v.pop_back();
  }
}

void LayerIndex::remove(int e, const std::vector<Element>& elems) {
  drop(items_, e);
  if (!gridded_) return;
  const Rect& r = elems[std::size_t(e)].r;
  if (cells(r) > kWideCells) {
    drop(wide_, e);
    return;
  }
  for (i64 cx = r.xlo >> kShift; cx <= (r.xhi >> kShift); ++cx) {
    for (i64 cy = r.ylo >> kShift; cy <= (r.yhi >> kShift); ++cy) {
      auto it = grid_.find(key(cx, cy));
      if (it == grid_.end()) continue;
      drop(it->second, e);
      if (it->second.empty()) grid_.erase(it);
    }
  }
}

std::size_t LayerIndex::memory() const {
  std::size_t bytes = items_.capacity() * sizeof(int) + wide_.capacity() * sizeof(int);
  for (const auto& kv : grid_) bytes += 48 + kv.second.capacity() * sizeof(int);
  return bytes;
}

// -- state -----------------------------------------------------------------------------

std::size_t check_rect_layers(const Model& m, const PinSpec& pin, const char* field) {
  if (!pin.rect_layers.empty() && pin.rect_layers.size() != pin.rects.size())
    throw std::invalid_argument(std::string(field) + ": one layer per rectangle");
  std::size_t anchor = pin.rects.size();
  for (std::size_t k = 0; k < pin.rects.size(); ++k) {
    const int l = pin.rect_layer(k);
    if (l < pin.layer || l >= m.steps)
      throw std::invalid_argument(std::string(field) + ": a layer of the deck, the pin's layer the lowest");
    if (l == pin.layer && anchor == pin.rects.size()) anchor = k;
  }
  if (anchor == pin.rects.size())
    throw std::invalid_argument(std::string(field) + ": the pin's layer is the lowest of its rectangles'");
  return anchor;
}

void check_block_car(const Model& m, const PinSpec& pin, const char* field) {
  for (const BlockCar& b : pin.block_car) {
    if (b.step < 0 || b.step >= m.steps || b.oxide < 0 || std::size_t(b.oxide) >= m.deck.oxides.size() ||
        !(b.ratio >= 0.0) || !std::isfinite(b.ratio))
      throw std::invalid_argument(std::string(field) + ": a step, an oxide and a finite ratio >= 0");
  }
}

Net::State::State(std::shared_ptr<const Model> model, std::vector<PinSpec> p)
    : holder(std::move(model)), m(*holder), pins(std::move(p)) {
  const std::size_t n = std::size_t(m.steps);
  index.resize(n);
  comp_of.resize(n);
  comps.resize(n);
  free_comps.resize(n);
  for (std::size_t i = 0; i < pins.size(); ++i) {
    const PinSpec& pin = pins[i];
    if (pin.layer < 0 || pin.layer >= m.steps) throw std::invalid_argument("pins.layer: unknown layer");
    if (pin.rects.empty()) throw std::invalid_argument("pins.rects: a pin needs a rectangle");
    double total = 0.0;
    std::uint64_t ox = 0;
    for (std::size_t o = 0; o < pin.gate_by_oxide.size() && o < m.deck.oxides.size(); ++o) {
      total += pin.gate_by_oxide[o];
      if (pin.gate_by_oxide[o] > 0 && o < 64) ox |= std::uint64_t(1) << o;
    }
    pin_gate.push_back(pin.gate_total_um2 >= 0 ? pin.gate_total_um2 : total);
    pin_oxides.push_back(ox);
    for (const Rect& r : pin.rects)
      if (!valid_rect(r)) throw std::invalid_argument("pins.rects: an empty, inverted or far rectangle");
    check_block_car(m, pin, "pins.block_car");
    anchor_rect.push_back(check_rect_layers(m, pin, "pins.rect_layers"));
    blocks = blocks || !pin.block_car.empty();
  }
  // The anchor (the pin's first rectangle on its lowest layer) first; every other
  // rectangle joins it at its own layer's step (one conductor inside the cell).
  for (std::size_t i = 0; i < pins.size(); ++i) {
    const PinSpec& pin = pins[i];
    const int first = new_element(pin.rects[anchor_rect[i]], pin.layer, -1 - i64(i), int(i), true);
    anchor_of_pin.push_back(first);
    insert(first, {});
    for (std::size_t k = 0; k < pin.rects.size(); ++k) {
      if (k == anchor_rect[i]) continue;
      const int e = new_element(pin.rects[k], pin.rect_layer(k), -1 - i64(i), int(i), false);
      insert(e, {{first, pin.rect_layer(k)}});
    }
  }
}

double Net::State::pin_cell(int p, int step) const { return at_step(pins[std::size_t(p)].cell_um2, step); }
double Net::State::pin_cell_side(int p, int step) const { return at_step(pins[std::size_t(p)].cell_side_um2, step); }

int Net::State::new_element(const Rect& r, int layer, i64 sid, int pin, bool anchor) {
  int e;
  if (!free_elems.empty()) {
    e = free_elems.back();
    free_elems.pop_back();
  } else {
    e = int(elems.size());
    elems.push_back({});
    adj.emplace_back();
    stamp.push_back(0);
    part_of.push_back(-1);
    for (auto& v : comp_of) v.push_back(-1);
  }
  elems[std::size_t(e)] = {r, sid, next_seq++, layer, pin, anchor, true};
  return e;
}

void Net::State::compact() {
  elems.shrink_to_fit();
  stamp.shrink_to_fit();
  part_of.shrink_to_fit();
  for (auto& a : adj) a.shrink_to_fit();
  for (auto& v : comp_of) v.shrink_to_fit();
  for (auto& pool : comps) pool.shrink_to_fit();
  for (auto& pool : comps)
    for (Comp& c : pool) c.members.shrink_to_fit();
}

std::uint32_t Net::State::tick() const {
  if (++clock == 0) {
    std::fill(stamp.begin(), stamp.end(), 0u);
    clock = 1;
  }
  return clock;
}

void Net::State::touching(int layer, const Rect& r, std::vector<std::pair<int, int>>& out) const {
  out.clear();
  index[std::size_t(layer)].near(r, stamp, clock, [&](int e) {
    if (edge_touch(r, elems[std::size_t(e)].r)) out.push_back({e, layer});
  });
  for (int other : {layer - 1, layer + 1}) {
    if (other < 0 || other >= m.steps || m.is_cut[std::size_t(other)] == m.is_cut[std::size_t(layer)]) continue;
    int step = std::max(layer, other);
    index[std::size_t(other)].near(r, stamp, clock, [&](int e) {
      if (overlap(r, elems[std::size_t(e)].r)) out.push_back({e, step});
    });
  }
}

void Net::State::routed_on(int layer, const std::vector<std::pair<int, int>>& near,
                           std::vector<Rect>& out) const {
  out.clear();
  for (const auto& n : near) {
    const Element& el = elems[std::size_t(n.first)];
    if (el.layer == layer && el.pin < 0) out.push_back(el.r);
  }
}

Measures Net::State::local_delta(const Rect& r, const std::vector<Rect>& local, int step) const {
  Measures d;
  clipped.clear();
  Rect c;
  for (const Rect& q : local)
    if (intersection(r, q, c)) clipped.push_back(c);
  if (clipped.empty()) d.area = rect_area(r);
  else if (clipped.size() == 1) d.area = rect_area(r) - rect_area(clipped[0]);
  else d.area = rect_area(r) - union_measures(clipped, sweep).area;
  if (!m.side_needed[std::size_t(step)]) return d;
  i128 own = 2 * (i128(r.xhi - r.xlo) + i128(r.yhi - r.ylo));
  if (local.empty()) {
    d.perimeter = own;
  } else if (local.size() == 1) {
    d.perimeter = own - shared_perimeter(r, local[0]);
  } else {
    with.assign(local.begin(), local.end());
    with.push_back(r);
    d.perimeter = union_measures(with, sweep).perimeter - union_measures(local, sweep).perimeter;
  }
  return d;
}

void Net::State::own_terms(Comp& c, int e, int step) const {
  const Element& el = elems[std::size_t(e)];
  if (el.pin < 0 || !el.anchor) return;
  const PinSpec& pin = pins[std::size_t(el.pin)];
  PinFigures& f = c.figures();
  f.gate.add(pin_gate[std::size_t(el.pin)]);
  f.diff.add(pin.diff_um2);
  f.cell.add(pin_cell(el.pin, step));
  f.cell_side.add(pin_cell_side(el.pin, step));
  f.pins.push_back(el.pin);
  if (pin_gate[std::size_t(el.pin)] > 0) f.gates.push_back(el.pin);
  c.oxides |= pin_oxides[std::size_t(el.pin)];
}

int Net::State::new_comp(int step) {
  auto& pool = comps[std::size_t(step)];
  auto& free = free_comps[std::size_t(step)];
  int c;
  if (!free.empty()) {
    c = free.back();
    free.pop_back();
  } else {
    c = int(pool.size());
    pool.emplace_back();
  }
  pool[std::size_t(c)].reset();
  pool[std::size_t(c)].alive = true;
  return c;
}

void Net::State::insert(int e, const std::vector<std::pair<int, int>>& extra) {
  Element& el = elems[std::size_t(e)];
  std::vector<std::pair<int, int>> neighbours;
  touching(el.layer, el.r, neighbours);
  neighbours.insert(neighbours.end(), extra.begin(), extra.end());
  index[std::size_t(el.layer)].add(e, elems);
  adj[std::size_t(e)] = neighbours;
  for (const auto& n : neighbours) adj[std::size_t(n.first)].push_back({e, n.second});
  const bool routed = el.pin < 0;
  std::vector<Rect> local;
  std::vector<int> merged;
  for (int s = el.layer; s < m.steps; ++s) {
    auto& cof = comp_of[std::size_t(s)];
    auto& pool = comps[std::size_t(s)];
    merged.clear();
    for (const auto& n : neighbours) {
      if (n.second > s) continue;
      int c = cof[std::size_t(n.first)];
      if (std::find(merged.begin(), merged.end(), c) == merged.end()) merged.push_back(c);
    }
    Comp own;
    own.members.push_back(e);
    own_terms(own, e, s);
    own.refresh();
    if (s == el.layer && routed) {
      routed_on(el.layer, neighbours, local);
      Measures d = local_delta(el.r, local, s);
      own.area = d.area;
      own.perim = d.perimeter;
    }
    int base;
    if (!merged.empty()) {
      base = merged[0];
      for (int c : merged)
        if (pool[std::size_t(c)].members.size() > pool[std::size_t(base)].members.size()) base = c;
      for (int c : merged) {
        if (c == base) continue;
        for (int x : pool[std::size_t(c)].members) cof[std::size_t(x)] = base;
        pool[std::size_t(base)].absorb(pool[std::size_t(c)]);
        pool[std::size_t(c)].reset();
        free_comps[std::size_t(s)].push_back(c);
      }
      pool[std::size_t(base)].absorb(own);
    } else {
      base = new_comp(s);
      pool[std::size_t(base)] = std::move(own);
      pool[std::size_t(base)].alive = true;
    }
    cof[std::size_t(e)] = base;
  }
  ++version;
}

void Net::State::rebuild(Comp& c, const std::vector<int>& members, int step) const {
  c.reset();
  c.alive = true;
  c.members = members;
  std::vector<Rect> routed;
  for (int x : members) {
    own_terms(c, x, step);
    const Element& el = elems[std::size_t(x)];
    if (el.layer == step && el.pin < 0) routed.push_back(el.r);
  }
  c.refresh();
  Measures u = union_measures(routed, sweep);
  c.area = u.area;
  c.perim = m.side_needed[std::size_t(step)] ? u.perimeter : 0;
}

// After element e left component `ci` at step s: its former neighbours `near` (joined
// at or below s) are searched in turns, one element each, so that a small part that
// broke off is found in time proportional to its own size, not the component's.
// Searches that meet become one. When at most one search is still going, the others
// are complete: they are the parts that broke off (`parts`); the one still going (or,
// if all ended, the largest) stays in the old component. Returns false when nothing
// broke off.
bool Net::State::split(int s, int ci, const std::vector<int>& near, std::vector<std::vector<int>>& parts) {
  const auto& cof = comp_of[std::size_t(s)];
  // Cheap sufficient test first: the neighbours hold each other together by their own links.
  std::uint32_t mark = tick();
  for (int x : near) stamp[std::size_t(x)] = mark;
  std::uint32_t linked = tick();
  std::vector<int> frontier{near[0]};
  stamp[std::size_t(near[0])] = linked;
  std::size_t reached = 1;
  while (!frontier.empty()) {
    int x = frontier.back();
    frontier.pop_back();
    for (const auto& n : adj[std::size_t(x)]) {
      if (n.second <= s && stamp[std::size_t(n.first)] == mark) {
        stamp[std::size_t(n.first)] = linked;
        ++reached;
        frontier.push_back(n.first);
      }
    }
  }
  if (reached == near.size()) return false;

  // Searches in turns. part_of[x] names the search that reached x (valid under `seen`).
  std::uint32_t seen = tick();
  std::vector<int> root;                     // union-find over searches
  std::vector<std::vector<int>> fronts, got;  // per search: to expand, reached
  auto find_root = [&](int i) {
    while (root[std::size_t(i)] != i) i = root[std::size_t(i)] = root[std::size_t(root[std::size_t(i)])];
    return i;
  };
  for (int start : near) {
    if (stamp[std::size_t(start)] == seen) continue;  // two links to one neighbour
    stamp[std::size_t(start)] = seen;
    part_of[std::size_t(start)] = int(root.size());
    root.push_back(int(root.size()));
    fronts.push_back({start});
    got.push_back({start});
  }
  std::size_t going = root.size();
  while (going > 1) {
    bool any = false;
    for (std::size_t i = 0; i < root.size() && going > 1; ++i) {
      if (root[i] != int(i) || fronts[i].empty()) continue;
      any = true;
      int x = fronts[i].back();
      fronts[i].pop_back();
      for (const auto& n : adj[std::size_t(x)]) {
        const int y = n.first;
        if (n.second > s || cof[std::size_t(y)] != ci) continue;
        if (stamp[std::size_t(y)] != seen) {
          stamp[std::size_t(y)] = seen;
          part_of[std::size_t(y)] = int(i);
          fronts[i].push_back(y);
          got[i].push_back(y);
          continue;
        }
        int j = find_root(part_of[std::size_t(y)]);
        if (j == int(i)) continue;
        // Two searches met: one part. The smaller list joins the larger.
        int keep = int(i), gone = j;
        if (got[std::size_t(gone)].size() > got[std::size_t(keep)].size()) std::swap(keep, gone);
        root[std::size_t(gone)] = keep;
        auto& kf = fronts[std::size_t(keep)];
        kf.insert(kf.end(), fronts[std::size_t(gone)].begin(), fronts[std::size_t(gone)].end());
        auto& kg = got[std::size_t(keep)];
        kg.insert(kg.end(), got[std::size_t(gone)].begin(), got[std::size_t(gone)].end());
        fronts[std::size_t(gone)].clear();
        got[std::size_t(gone)].clear();
        --going;  // the merged pair counts once
        if (keep != int(i)) {  // this search lives on under `keep`: x's other links too
          fronts[std::size_t(keep)].push_back(x);
          break;
        }
      }
      if (root[i] == int(i) && fronts[i].empty()) --going;  // search i is complete
    }
    if (!any) break;
  }
  // The part that stays: the search still going, else the largest complete one.
  int stays = -1;
  for (std::size_t i = 0; i < root.size(); ++i) {
    if (root[i] != int(i)) continue;
    if (!fronts[i].empty()) { stays = int(i); break; }
    if (stays < 0 || got[i].size() > got[std::size_t(stays)].size()) stays = int(i);
  }
  parts.clear();
  for (std::size_t i = 0; i < root.size(); ++i)
    if (root[i] == int(i) && int(i) != stays) parts.push_back(std::move(got[i]));
  return !parts.empty();
}

void Net::State::erase(int e) {
  Element& el = elems[std::size_t(e)];
  const int layer = el.layer;
  std::vector<std::pair<int, int>> links = std::move(adj[std::size_t(e)]);
  adj[std::size_t(e)].clear();
  for (const auto& n : links) {
    auto& back = adj[std::size_t(n.first)];
    for (std::size_t i = 0; i < back.size(); ++i) {
      if (back[i].first == e) {
        back[i] = back.back();
        back.pop_back();
        break;
      }
    }
  }
  index[std::size_t(layer)].remove(e, elems);
  std::vector<int> near;
  std::vector<std::vector<int>> parts;
  std::vector<Rect> local;
  std::vector<std::pair<int, int>> near_links;
  for (int s = layer; s < m.steps; ++s) {
    auto& cof = comp_of[std::size_t(s)];
    auto& pool = comps[std::size_t(s)];
    int ci = cof[std::size_t(e)];
    cof[std::size_t(e)] = -1;
    Comp& c = pool[std::size_t(ci)];
    drop(c.members, e);
    if (c.members.empty()) {
      c.reset();
      free_comps[std::size_t(s)].push_back(ci);
      continue;
    }
    near.clear();
    near_links.clear();
    for (const auto& n : links) {
      if (n.second <= s) {
        near.push_back(n.first);
        near_links.push_back(n);
      }
    }
    if (s == layer) {  // take away what the shape contributed (union areas of parts add)
      routed_on(layer, near_links, local);
      Measures d = local_delta(el.r, local, s);
      c.area -= d.area;
      c.perim -= d.perimeter;
    }
    if (near.size() <= 1 || !split(s, ci, near, parts)) continue;
    // The parts that broke off become components of their own; what they held leaves
    // the old one, which keeps the rest (pin sums exactly: their terms subtracted).
    std::uint32_t gone = tick();
    bool pins_left = false;
    for (const auto& part : parts) {
      int ni = new_comp(s);
      Comp& fresh = comps[std::size_t(s)][std::size_t(ni)];
      rebuild(fresh, part, s);
      for (int x : part) {
        cof[std::size_t(x)] = ni;
        stamp[std::size_t(x)] = gone;
      }
      Comp& old = comps[std::size_t(s)][std::size_t(ci)];
      old.area -= fresh.area;
      old.perim -= fresh.perim;
      if (fresh.figures_) {
        pins_left = true;
        PinFigures& f = old.figures();
        for (int p : fresh.figures_->pins) {
          f.gate.add(-pin_gate[std::size_t(p)]);
          f.diff.add(-pins[std::size_t(p)].diff_um2);
          f.cell.add(-pin_cell(p, s));
          f.cell_side.add(-pin_cell_side(p, s));
        }
      }
    }
    Comp& old = comps[std::size_t(s)][std::size_t(ci)];
    auto& ms = old.members;
    ms.erase(std::remove_if(ms.begin(), ms.end(), [&](int x) { return stamp[std::size_t(x)] == gone; }), ms.end());
    if (pins_left) {
      PinFigures& f = *old.figures_;
      auto moved_out = [&](int p) { return stamp[std::size_t(anchor_of_pin[std::size_t(p)])] == gone; };
      f.pins.erase(std::remove_if(f.pins.begin(), f.pins.end(), moved_out), f.pins.end());
      f.gates.erase(std::remove_if(f.gates.begin(), f.gates.end(), moved_out), f.gates.end());
      old.oxides = 0;
      for (int p : f.pins) old.oxides |= pin_oxides[std::size_t(p)];
      if (f.pins.empty()) old.figures_.reset();
      old.refresh();
    }
  }
  el.alive = false;
  by_sid.erase(el.sid);
  free_elems.push_back(e);
  ++version;
}

}  // namespace etchguard
