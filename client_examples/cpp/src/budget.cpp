// LocalBudget: a BudgetReply evaluated by the router (see etchguard/budget.hpp).
#include "etchguard/budget.hpp"

#include <algorithm>
#include <cmath>
#include <limits>
#include <stdexcept>

namespace etchguard::client {

namespace {

constexpr double kTolerance = 1e-9;  // the contract's relative tolerance on a limit

Box ToBox(const pb::Rect& r) { return Box{r.xlo(), r.ylo(), r.xhi(), r.yhi()}; }

// Same layer: positive-area overlap or a shared edge of positive length.
bool EdgeTouch(const Box& a, const Box& b) {
  const std::int64_t ix = std::min(a.xhi, b.xhi) - std::max(a.xlo, b.xlo);
  const std::int64_t iy = std::min(a.yhi, b.yhi) - std::max(a.ylo, b.ylo);
  return ix >= 0 && iy >= 0 && (ix > 0 || iy > 0);
}

// A cut on a metal: positive-area overlap.
bool Overlap(const Box& a, const Box& b) {
  return std::min(a.xhi, b.xhi) > std::max(a.xlo, b.xlo) && std::min(a.yhi, b.yhi) > std::max(a.ylo, b.ylo);
}

bool Meets(const Box& a, const Box& b) { return a.xlo <= b.xhi && b.xlo <= a.xhi && a.ylo <= b.yhi && b.ylo <= a.yhi; }

double Utilization(double ratio, double limit) {
  if (limit <= 0) return ratio > 0 ? std::numeric_limits<double>::infinity() : 0.0;
  return ratio / limit;
}

using Interval = std::pair<std::int64_t, std::int64_t>;

// Covered y intervals of the boxes spanning the slab [x0, x1), merged.
std::vector<Interval> Covered(const std::vector<Box>& boxes, std::int64_t x0, std::int64_t x1) {
  std::vector<Interval> spans;
  for (const Box& b : boxes)
    if (b.xlo <= x0 && x1 <= b.xhi) spans.push_back({b.ylo, b.yhi});
  std::sort(spans.begin(), spans.end());
  std::vector<Interval> merged;
  for (const Interval& s : spans) {
    if (!merged.empty() && s.first <= merged.back().second) merged.back().second = std::max(merged.back().second, s.second);
    else merged.push_back(s);
  }
  return merged;
}

// Length of the symmetric difference of two merged interval sets.
__int128 SymmetricDifference(const std::vector<Interval>& a, const std::vector<Interval>& b) {
  std::vector<std::pair<std::int64_t, int>> events;
  for (const Interval& i : a) events.push_back({i.first, 1}), events.push_back({i.second, -1});
  for (const Interval& i : b) events.push_back({i.first, 2}), events.push_back({i.second, -2});
  std::sort(events.begin(), events.end());
  int in_a = 0, in_b = 0;
  __int128 length = 0;
  std::int64_t last = 0;
  for (const auto& [y, what] : events) {
    if ((in_a > 0) != (in_b > 0)) length += y - last;
    last = y;
    if (what == 1 || what == -1) in_a += what;
    else in_b += what / 2;
  }
  return length;
}

}  // namespace

// The textbook sweep over distinct x coordinates (as the service's own union measures):
// each slab adds width x covered length to the area and 2 x width per interval of
// horizontal boundary; between slabs the vertical boundary is the symmetric difference
// of their covered sets, so holes count and shared edges add nothing.
std::pair<double, double> UnionMeasures(const std::vector<Box>& boxes) {
  std::vector<std::int64_t> xs;
  for (const Box& b : boxes) xs.push_back(b.xlo), xs.push_back(b.xhi);
  std::sort(xs.begin(), xs.end());
  xs.erase(std::unique(xs.begin(), xs.end()), xs.end());
  __int128 area = 0, perimeter = 0;
  std::vector<Interval> previous;
  for (std::size_t i = 0; i + 1 < xs.size(); ++i) {
    const std::vector<Interval> slab = Covered(boxes, xs[i], xs[i + 1]);
    const __int128 width = xs[i + 1] - xs[i];
    for (const Interval& s : slab) {
      area += width * (s.second - s.first);
      perimeter += 2 * width;
    }
    perimeter += SymmetricDifference(previous, slab);
    previous = slab;
  }
  perimeter += SymmetricDifference(previous, {});
  return {static_cast<double>(area), static_cast<double>(perimeter)};
}

double LocalBudget::Term::Value(double area_um2, double perimeter_um) const {
  return std::max(0.0, factor * (conductor + per_area * area_um2 + per_perimeter * perimeter_um) - credit) / gate;
}

LocalBudget::LocalBudget(const pb::BudgetReply& reply) {
  if (!reply.found()) throw std::invalid_argument("the budget found no component at the point");
  layer_ = reply.layer();
  const double dbu = static_cast<double>(reply.dbu_per_micron());
  scale_area_ = 1.0 / (dbu * dbu);
  scale_length_ = 1.0 / dbu;
  for (const pb::BudgetTerm& t : reply.terms()) {
    terms_.push_back({t.conductor_um2(), t.per_area(), t.per_perimeter_um(), t.factor(), t.credit_um2(), t.gate_um2()});
  }
  for (const pb::BudgetRatio& r : reply.ratios()) {
    ratios_.push_back({r.has_term() ? static_cast<int>(r.term()) : -1, r.spent(), r.floor(), r.limit(), r.always(),
                       static_cast<int>(r.step())});
  }
  for (const pb::BudgetWatch& w : reply.watches())
    watches_.push_back({w.has_term() ? static_cast<int>(w.term()) : -1, w.spent(), w.floor(), w.held(),
                        static_cast<int>(w.step())});
  rest_ = reply.rest_worst_utilization();
  fixed_ = reply.fixed_change_utilization();
  common_added_ = reply.common_added_area_um2();
  for (const pb::Rect& r : reply.own()) own_.push_back(ToBox(r));
  connects_ = own_;
  for (const pb::Rect& r : reply.own_pins()) connects_.push_back(ToBox(r));
  for (const pb::PlacedShape& f : reply.foreign())
    (f.layer() == layer_ ? same_layer_ : other_layer_).push_back(ToBox(f.rect()));
  window_ = ToBox(reply.window());
  curve_ = reply.cost();
}

bool LocalBudget::Covers(const std::vector<pb::Shape>& shapes) const {
  if (shapes.empty()) return false;
  std::vector<Box> boxes;
  for (const pb::Shape& s : shapes) {
    if (!s.has_rect() || s.layer() != layer_) return false;
    const Box b = ToBox(s.rect());
    if (b.xlo < window_.xlo || b.ylo < window_.ylo || b.xhi > window_.xhi || b.yhi > window_.yhi) return false;
    for (const Box& f : same_layer_)
      if (EdgeTouch(b, f)) return false;
    for (const Box& f : other_layer_)
      if (Overlap(b, f)) return false;
    boxes.push_back(b);
  }
  std::vector<char> joined(boxes.size(), 0);
  for (std::size_t i = 0; i < boxes.size(); ++i)
    for (const Box& o : connects_) joined[i] = joined[i] || EdgeTouch(boxes[i], o);
  for (bool grew = true; grew;) {
    grew = false;
    for (std::size_t i = 0; i < boxes.size(); ++i) {
      if (joined[i]) continue;
      for (std::size_t j = 0; j < boxes.size() && !joined[i]; ++j) joined[i] = joined[j] && EdgeTouch(boxes[i], boxes[j]);
      grew = grew || joined[i];
    }
  }
  return std::all_of(joined.begin(), joined.end(), [](char j) { return j != 0; });
}

std::pair<double, double> LocalBudget::Added(const std::vector<Box>& boxes) const {
  std::vector<Box> near;
  for (const Box& o : own_)
    if (std::any_of(boxes.begin(), boxes.end(), [&](const Box& b) { return Meets(o, b); })) near.push_back(o);
  const auto before = UnionMeasures(near);
  near.insert(near.end(), boxes.begin(), boxes.end());
  const auto after = UnionMeasures(near);
  return {after.first - before.first, after.second - before.second};
}

std::optional<LocalScore> LocalBudget::Evaluate(const std::vector<pb::Shape>& shapes) const {
  if (!Covers(shapes)) return std::nullopt;
  std::vector<Box> boxes;
  for (const pb::Shape& s : shapes) boxes.push_back(ToBox(s.rect()));
  const auto [area, perimeter] = Added(boxes);
  return EvaluateAdded(area, perimeter);
}

LocalScore LocalBudget::EvaluateAdded(double area_dbu2, double perimeter_dbu) const {
  const double a = area_dbu2 * scale_area_, p = perimeter_dbu * scale_length_;
  std::vector<double> values(terms_.size());
  for (std::size_t t = 0; t < terms_.size(); ++t) values[t] = terms_[t].Value(a, p);
  auto value = [&](int term, double spent, double floor) {
    return term < 0 ? floor : std::max(floor, spent + values[std::size_t(term)]);
  };
  std::vector<int> moved;  // steps whose ratios count
  for (const Watch& w : watches_)
    if (value(w.term, w.spent, w.floor) != w.held) moved.push_back(w.step);
  double change = fixed_, worst = rest_;
  for (const Ratio& r : ratios_) {
    const double u = Utilization(value(r.term, r.spent, r.floor), r.limit);
    worst = std::max(worst, u);
    if (r.always || std::find(moved.begin(), moved.end(), r.step) != moved.end()) change = std::max(change, u);
  }
  return LocalScore{change, worst, worst <= 1.0 + kTolerance, !(change <= 1.0 + kTolerance), Cost(change),
                    common_added_ + a};
}

double LocalBudget::Cost(double u) const {
  const pb::CostCurve& c = curve_;
  if (u <= c.knee()) return 0.0;
  if (u <= 1.0) return c.scale() * std::pow((u - c.knee()) / (1.0 - c.knee()), c.exponent());
  return c.violation() + c.scale() * c.over_slope() * (u - 1.0);
}

pb::BudgetRequest BudgetRequest(const std::string& net, const std::string& layer, std::int64_t x, std::int64_t y,
                                const std::vector<pb::Shape>& common, const std::optional<Box>& window) {
  pb::BudgetRequest r;
  r.set_net(net);
  r.set_layer(layer);
  r.set_x(x);
  r.set_y(y);
  for (const pb::Shape& s : common) *r.add_common() = s;
  if (window) *r.mutable_window() = ToRect(*window);
  return r;
}

pb::BudgetReply Budget(Client& client, const pb::BudgetRequest& request) {
  grpc::ClientContext context;
  client.Prepare(context);
  pb::BudgetReply reply;
  ThrowIfRefused(client.stub().Budget(&context, request, &reply));
  return reply;
}

pb::BudgetReply Budget(Session& session, const pb::BudgetRequest& request) {
  pb::SessionRequest ask;
  *ask.mutable_budget() = request;
  pb::SessionReply reply = session.Ask(std::move(ask));
  if (reply.result_case() != pb::SessionReply::kBudget) {
    throw std::runtime_error("session reply " + std::to_string(reply.seq()) + " carries no budget result");
  }
  return std::move(*reply.mutable_budget());
}

}  // namespace etchguard::client
