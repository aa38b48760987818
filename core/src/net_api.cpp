// The Net face: validated mutations, checks, offences, headroom and advice queries.
#include <algorithm>
#include <limits>
#include <numeric>
#include <stdexcept>

#include "state.hpp"

namespace etchguard {

Net::Net(std::shared_ptr<const Model> model, std::vector<PinSpec> pins)
    : s_(std::make_unique<State>(std::move(model), std::move(pins))) {}
Net::~Net() = default;
Net::Net(Net&&) noexcept = default;
Net& Net::operator=(Net&&) noexcept = default;

static bool valid_shape(const Model& m, int layer, const Rect& r) {
  return layer >= 0 && layer < m.steps && valid_rect(r);
}

Status Net::add(i64 id, int layer, const Rect& r) { return add_many(&id, &layer, &r, 1); }

Status Net::add_many(const i64* ids, const int* layers, const Rect* rects, std::size_t n) {
  State& st = *s_;
  for (std::size_t i = 0; i < n; ++i) {
    if (layers[i] < 0 || layers[i] >= st.m.steps) return Status::BadLayer;
    if (!valid_shape(st.m, layers[i], rects[i])) return Status::BadRect;
    if (ids[i] < 0 || st.by_sid.count(ids[i])) return Status::DuplicateId;
    for (std::size_t j = 0; j < i; ++j)
      if (ids[j] == ids[i]) return Status::DuplicateId;
  }
  for (std::size_t i = 0; i < n; ++i) {
    int e = st.new_element(rects[i], layers[i], ids[i], -1, false);
    st.by_sid[ids[i]] = e;
    st.insert(e, {});
    ++st.shapes;
  }
  if (n > 1) st.compact();  // a net opened with its shapes: give back what growth left over
  return Status::Ok;
}

Status Net::remove(const i64* ids, std::size_t n) {
  State& st = *s_;
  for (std::size_t i = 0; i < n; ++i) {
    if (!st.by_sid.count(ids[i])) return Status::UnknownId;
    for (std::size_t j = 0; j < i; ++j)
      if (ids[j] == ids[i]) return Status::DuplicateId;
  }
  if (n * 2 > st.shapes) {  // cheaper to build again from what stays
    std::vector<i64> keep_ids, gone(ids, ids + n);
    std::vector<int> keep_layers;
    std::vector<Rect> keep_rects;
    std::sort(gone.begin(), gone.end());
    std::vector<i64> all_ids;
    std::vector<int> all_layers;
    std::vector<Rect> all_rects;
    shapes(all_ids, all_layers, all_rects);
    for (std::size_t i = 0; i < all_ids.size(); ++i) {
      if (std::binary_search(gone.begin(), gone.end(), all_ids[i])) continue;
      keep_ids.push_back(all_ids[i]);
      keep_layers.push_back(all_layers[i]);
      keep_rects.push_back(all_rects[i]);
    }
    std::int64_t version = st.version;
    auto fresh = std::make_unique<State>(st.holder, st.pins);
    s_ = std::move(fresh);
    add_many(keep_ids.data(), keep_layers.data(), keep_rects.data(), keep_ids.size());
    s_->version = version + 1 + std::int64_t(keep_ids.size());
    return Status::Ok;
  }
  for (std::size_t i = 0; i < n; ++i) {
    st.erase(st.by_sid.at(ids[i]));
    --st.shapes;
  }
  return Status::Ok;
}

std::size_t Net::shape_count() const { return s_->shapes; }
bool Net::has_shape(i64 id) const { return s_->by_sid.count(id) != 0; }

void Net::shapes(std::vector<i64>& ids, std::vector<int>& layers, std::vector<Rect>& rects) const {
  const State& st = *s_;
  std::vector<int> order;
  for (std::size_t e = 0; e < st.elems.size(); ++e)
    if (st.elems[e].alive && st.elems[e].pin < 0) order.push_back(int(e));
  std::sort(order.begin(), order.end(),
            [&](int a, int b) { return st.elems[std::size_t(a)].seq < st.elems[std::size_t(b)].seq; });
  ids.clear();
  layers.clear();
  rects.clear();
  for (int e : order) {
    ids.push_back(st.elems[std::size_t(e)].sid);
    layers.push_back(st.elems[std::size_t(e)].layer);
    rects.push_back(st.elems[std::size_t(e)].r);
  }
}

// -- checks --------------------------------------------------------------------------

namespace {

// The order of "worse" between two entries: utilization, ratio, the tighter limit, then
// the first pin, so that a report does not depend on the order components were built in.
bool worse(const Entry& a, const Entry& b) {
  if (a.utilization != b.utilization) return a.utilization > b.utilization;
  if (a.ratio != b.ratio) return a.ratio > b.ratio;
  if (a.limit != b.limit) return a.limit < b.limit;
  return a.gate < b.gate;
}

}  // namespace

template <class F>
static void each_entry(const Net::State& st, F f) {
  const Assessment& a = st.assess();
  std::vector<const double*> rows(st.pins.size(), nullptr);
  for (std::size_t p = 0; p < st.pins.size(); ++p)
    if (a.slot_of_pin[p] >= 0) rows[p] = &a.car[a.row(a.slot_of_pin[p], 0)];
  std::vector<Entry> es;
  for (int s = 0; s < st.m.steps; ++s) {
    const auto& pool = st.comps[std::size_t(s)];
    for (std::size_t ci = 0; ci < pool.size(); ++ci) {
      const Comp& c = pool[ci];
      if (!c.alive || c.G <= 0) continue;
      es.clear();
      st.entries(s, c, true, rows.data(), st.pin_oxides.data(), es);
      for (const Entry& e : es) f(e, c);
    }
  }
}

Report Net::check() const {
  const State& st = *s_;
  const Model& m = st.m;
  // Key order: step, measure, kind (cumulative before partial, as the names sort), oxide name.
  std::vector<int> oxide_rank(m.deck.oxides.size());
  std::iota(oxide_rank.begin(), oxide_rank.end(), 0);
  std::sort(oxide_rank.begin(), oxide_rank.end(),
            [&](int x, int y) { return m.deck.oxides[std::size_t(x)] < m.deck.oxides[std::size_t(y)]; });
  std::vector<int> rank_of(m.deck.oxides.size());
  for (std::size_t i = 0; i < oxide_rank.size(); ++i) rank_of[std::size_t(oxide_rank[i])] = int(i);
  auto key = [&](const Entry& e) {
    return std::make_tuple(e.step, int(e.measure), e.kind == Kind::Cumulative ? 0 : 1, rank_of[std::size_t(e.oxide)]);
  };
  std::vector<Entry> best;
  each_entry(st, [&](const Entry& e, const Comp&) {
    for (Entry& b : best) {
      if (key(b) == key(e)) {
        if (worse(e, b)) b = e;
        return;
      }
    }
    best.push_back(e);
  });
  std::sort(best.begin(), best.end(), [&](const Entry& x, const Entry& y) { return key(x) < key(y); });
  Report r;
  for (const Entry& e : best) {
    r.checks.push_back({e.step, e.measure, e.kind, e.oxide, e.ratio, e.limit, e.utilization, e.gate});
    r.worst_utilization = std::max(r.worst_utilization, e.utilization);
  }
  r.legal = is_legal(r.worst_utilization);
  return r;
}

std::vector<Offence> Net::offences() const {
  const State& st = *s_;
  std::vector<Offence> out;
  each_entry(st, [&](const Entry& e, const Comp& c) {
    if (is_legal(e.utilization)) return;
    Offence o;
    o.check = {e.step, e.measure, e.kind, e.oxide, e.ratio, e.limit, e.utilization, e.gate};
    for (int x : c.members) {
      const Element& el = st.elems[std::size_t(x)];
      if (el.pin < 0) o.shape_ids.push_back(el.sid);
    }
    std::sort(o.shape_ids.begin(), o.shape_ids.end());
    o.pins = c.pins();
    std::sort(o.pins.begin(), o.pins.end());
    out.push_back(std::move(o));
  });
  std::stable_sort(out.begin(), out.end(), [](const Offence& x, const Offence& y) {
    if (x.check.step != y.check.step) return x.check.step < y.check.step;
    return x.check.utilization > y.check.utilization;
  });
  return out;
}

double Net::worst_at(int step) const {
  const Assessment& a = s_->assess();
  if (step < 0 || step >= s_->m.steps) return 0.0;
  return a.step_worst[std::size_t(step)];
}

// -- headroom --------------------------------------------------------------------------

// Added conductor on layer L raises the partial ratio at L and, by the same term, every
// cumulative ratio whose feeding chain passes through L; each check allows
// RuleSpec::headroom more, and the headroom is the least of them. A run at the layer's
// default width w adds w um^2 of area and two side walls of thickness um^2 per um.
Headroom Net::headroom(int layer, i64 x, i64 y) const {
  const State& st = *s_;
  const Model& m = st.m;
  const double inf = std::numeric_limits<double>::infinity();
  Headroom h;
  h.area_um2 = h.side_um2 = h.length_um = inf;
  if (layer < 0 || layer >= m.steps) throw std::invalid_argument("layer: unknown layer");
  int hit = -1;
  Rect point{x, y, x, y};
  st.index[std::size_t(layer)].near(point, st.stamp, st.clock, [&](int e) {
    const Rect& r = st.elems[std::size_t(e)].r;
    if (hit < 0 && r.xlo <= x && x <= r.xhi && r.ylo <= y && y <= r.yhi) hit = e;
  });
  if (hit < 0) return h;
  h.found = true;
  const Assessment& a = st.assess();
  const Comp& c = st.comps[std::size_t(layer)][std::size_t(st.comp_of[std::size_t(layer)][std::size_t(hit)])];
  struct Bind { double room; int step; Kind kind; int oxide; int gate; };
  Bind best[2] = {{inf, -1, Kind::Partial, -1, -1}, {inf, -1, Kind::Partial, -1, -1}};
  if (c.G > 0) {
    for (const CheckKey& key : m.partial_checks[std::size_t(layer)]) {
      if (!(c.oxides & (std::uint64_t(1) << key.oxide))) continue;
      const RuleSpec& rule = m.deck.rules[std::size_t(key.rule)];
      double conductor = m.conductor(layer, key.measure, c.area, c.cell_um2, c.cell_side_um2, c.perim);
      double room = rule.headroom(rule.partial_limit(c.D), c.G, c.D, 0.0, conductor);
      Bind& b = best[int(key.measure)];
      if (room < b.room) b = {room, layer, Kind::Partial, key.oxide, -1};
    }
    for (int s = layer; s < m.steps; ++s) {
      for (const CheckKey& key : m.cumulative_checks[std::size_t(s)]) {
        const int g = key.group;
        if (!m.in_chain(layer, s, g)) continue;
        const RuleSpec* factors = m.factors(layer, g);
        double conductor = m.conductor(layer, key.measure, c.area, c.cell_um2, c.cell_side_um2, c.perim);
        double term = factors == nullptr ? conductor / c.G : factors->ratio(conductor, c.G, c.D);
        const RuleSpec& rule = m.deck.rules[std::size_t(key.rule)];
        for (int p : c.gates()) {
          if (!(st.pin_oxides[std::size_t(p)] & (std::uint64_t(1) << key.oxide))) continue;
          const Comp& later = st.comps[std::size_t(s)][std::size_t(
              st.comp_of[std::size_t(s)][std::size_t(st.anchor_of_pin[std::size_t(p)])])];
          double limit = rule.cumulative_limit(later.D);
          double spent = a.car[a.row(a.slot_of_pin[std::size_t(p)], g) + std::size_t(s)] - term;
          double room = factors == nullptr ? (limit - spent) * c.G - conductor
                                           : factors->headroom(limit, c.G, c.D, spent, conductor);
          Bind& b = best[int(key.measure)];
          if (room < b.room) b = {room, s, Kind::Cumulative, key.oxide, p};
        }
      }
    }
  }
  h.area_um2 = best[0].room;
  h.side_um2 = best[1].room;
  const LayerSpec& info = m.deck.layers[std::size_t(layer)];
  int which = -1;
  if (!info.cut && info.wire_width > 0 && h.area_um2 < inf) {
    h.length_um = h.area_um2 / (double(info.wire_width) / double(m.deck.dbu_per_micron));
    which = 0;
  }
  if (!info.cut && info.thickness_um > 0 && h.side_um2 < inf) {
    double side_length = h.side_um2 / (2.0 * info.thickness_um);
    if (side_length < h.length_um) {
      h.length_um = side_length;
      which = 1;
    }
  }
  if (which < 0) which = best[0].step >= 0 ? 0 : 1;  // no run length (a cut): what binds the area
  if (best[which].step >= 0) {
    h.bind_step = best[which].step;
    h.bind_kind = best[which].kind;
    h.bind_measure = Measure(which);
    h.bind_oxide = best[which].oxide;
    h.bind_gate = best[which].gate;
  }
  return h;
}

// -- queries for advice ---------------------------------------------------------------

std::vector<Toucher> Net::touching(int layer, const Rect& r) const {
  if (layer < 0 || layer >= s_->m.steps) throw std::invalid_argument("layer: unknown layer");
  std::vector<std::pair<int, int>> found;
  s_->touching(layer, r, found);
  std::vector<Toucher> out;
  for (const auto& f : found) out.push_back({f.first, f.second});
  return out;
}

bool Net::reaches_gate(int element, int step) const {
  const State& st = *s_;
  if (step < 0 || step >= st.m.steps || element < 0 || std::size_t(element) >= st.elems.size()) return false;
  int c = st.comp_of[std::size_t(step)][std::size_t(element)];
  return c >= 0 && st.comps[std::size_t(step)][std::size_t(c)].G > 0;
}

std::vector<double> Net::pin_diffusion(int pin) const {
  const State& st = *s_;
  if (pin < 0 || std::size_t(pin) >= st.pins.size()) throw std::invalid_argument("pin: unknown pin");
  std::vector<double> out(std::size_t(st.m.steps), std::numeric_limits<double>::quiet_NaN());
  const int anchor = st.anchor_of_pin[std::size_t(pin)];
  for (int s = st.pins[std::size_t(pin)].layer; s < st.m.steps; ++s)
    out[std::size_t(s)] = st.comps[std::size_t(s)][std::size_t(st.comp_of[std::size_t(s)][std::size_t(anchor)])].D;
  return out;
}

std::vector<Rect> Net::near(int layer, const Rect& r) const {
  const State& st = *s_;
  if (layer < 0 || layer >= st.m.steps) throw std::invalid_argument("layer: unknown layer");
  std::vector<Rect> out;
  st.index[std::size_t(layer)].near(r, st.stamp, st.clock, [&](int e) {
    if (meets(st.elems[std::size_t(e)].r, r)) out.push_back(st.elems[std::size_t(e)].r);
  });
  return out;
}

Net::ElementInfo Net::element(int e) const {
  const State& st = *s_;
  if (e < 0 || std::size_t(e) >= st.elems.size() || !st.elems[std::size_t(e)].alive)
    throw std::invalid_argument("element: not held");
  const Element& el = st.elems[std::size_t(e)];
  return {el.layer, el.r, el.sid};
}

std::size_t Net::memory_bytes() const {
  const State& st = *s_;
  std::size_t bytes = sizeof(State) + st.elems.capacity() * sizeof(Element) + st.stamp.capacity() * 4;
  bytes += st.by_sid.size() * 32 + st.by_sid.bucket_count() * 8;
  for (const auto& a : st.adj) bytes += sizeof(a) + a.capacity() * sizeof(std::pair<int, int>);
  for (const auto& li : st.index) bytes += sizeof(li) + li.memory();
  for (const auto& v : st.comp_of) bytes += sizeof(v) + v.capacity() * sizeof(int);
  for (const auto& pool : st.comps) {
    bytes += sizeof(pool) + pool.capacity() * sizeof(Comp);
    for (const Comp& c : pool)
      bytes += c.members.capacity() * sizeof(int) +
               (c.figures_ ? sizeof(PinFigures) + (c.gates().capacity() + c.pins().capacity()) * sizeof(int) : 0);
  }
  const Assessment& a = st.assessment;
  bytes += (a.term.capacity() + a.car.capacity()) * sizeof(double);
  for (const auto& v : a.ranked) bytes += v.capacity() * 16;
  for (const auto& v : a.comp_worst) bytes += v.capacity() * 8;
  for (const auto& v : a.partial_worst) bytes += v.capacity() * 8;
  for (const auto& v : a.best) bytes += v.capacity() * 8;
  for (const auto& v : a.feeder_start) bytes += v.capacity() * 4;
  for (const auto& v : a.feeder_items) bytes += v.capacity() * 16;
  return bytes;
}

}  // namespace etchguard
