#include "geometry.hpp"

#include <algorithm>

namespace etchguard {

namespace {

using Interval = std::pair<i64, i64>;

// Merge closed intervals; touching ones become one (no boundary between them).
void merge(std::vector<Interval>& v) {
  std::sort(v.begin(), v.end());
  std::size_t w = 0;
  for (std::size_t i = 0; i < v.size(); ++i) {
    if (w > 0 && v[i].first <= v[w - 1].second) {
      v[w - 1].second = std::max(v[w - 1].second, v[i].second);
    } else {
      v[w++] = v[i];
    }
  }
  v.resize(w);
}

// Length of (A xor B) for two sorted lists of disjoint intervals.
i128 symmetric_difference(const std::vector<Interval>& a, const std::vector<Interval>& b,
                          std::vector<std::pair<i64, int>>& points) {
  points.clear();
  for (const auto& iv : a) { points.push_back({iv.first, 1}); points.push_back({iv.second, -1}); }
  for (const auto& iv : b) { points.push_back({iv.first, 1}); points.push_back({iv.second, -1}); }
  std::sort(points.begin(), points.end());
  int depth = 0;
  i128 total = 0;
  i64 previous = 0;
  for (const auto& p : points) {
    if (depth == 1) total += i128(p.first) - i128(previous);
    depth += p.second;
    previous = p.first;
  }
  return total;
}

}  // namespace

Measures union_measures(const std::vector<Rect>& rects) {
  SweepBuffers buffers;
  return union_measures(rects, buffers);
}

Measures union_measures(const std::vector<Rect>& rects, SweepBuffers& b) {
  Measures m;
  if (rects.empty()) return m;
  if (rects.size() == 1) {
    const Rect& r = rects[0];
    m.area = rect_area(r);
    m.perimeter = 2 * (i128(r.xhi - r.xlo) + i128(r.yhi - r.ylo));
    return m;
  }
  auto& xs = b.xs;
  auto &by_start = b.by_start, &active = b.active;
  auto &previous = b.previous, &current = b.current;
  xs.clear();
  for (const Rect& r : rects) { xs.push_back(r.xlo); xs.push_back(r.xhi); }
  std::sort(xs.begin(), xs.end());
  xs.erase(std::unique(xs.begin(), xs.end()), xs.end());
  by_start.assign(rects.begin(), rects.end());
  std::sort(by_start.begin(), by_start.end(), [](const Rect& a, const Rect& b) { return a.xlo < b.xlo; });
  active.clear();
  previous.clear();
  std::size_t cursor = 0;
  for (std::size_t i = 0; i + 1 < xs.size(); ++i) {
    i64 x0 = xs[i], x1 = xs[i + 1];
    while (cursor < by_start.size() && by_start[cursor].xlo <= x0) active.push_back(by_start[cursor++]);
    active.erase(std::remove_if(active.begin(), active.end(), [x0](const Rect& r) { return r.xhi <= x0; }),
                 active.end());
    current.clear();
    for (const Rect& r : active) current.push_back({r.ylo, r.yhi});
    merge(current);
    i128 width = i128(x1) - i128(x0);
    i128 covered = 0;
    for (const auto& iv : current) covered += i128(iv.second) - i128(iv.first);
    m.area += width * covered;
    m.perimeter += 2 * width * i128(current.size());
    m.perimeter += symmetric_difference(previous, current, b.points);
    std::swap(previous, current);
  }
  for (const auto& iv : previous) m.perimeter += i128(iv.second) - i128(iv.first);
  return m;
}

}  // namespace etchguard
