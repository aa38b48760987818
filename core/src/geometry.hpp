// Rectangles in DBU: contact predicates and the exact measures of unions.
//
// Union measures use a plane sweep over the distinct x coordinates: in every slab the
// covered y intervals are merged; the slab adds width * covered to the area and
// 2 * width * intervals of horizontal boundary, and between two slabs the vertical
// boundary is the length of the symmetric difference of their covered y sets, so holes
// count and shared edges add nothing (the textbook union-of-rectangles sweep; J. L.
// Bentley, "Algorithms for Klee's rectangle problems", 1977; de Berg et al.,
// "Computational Geometry", ch. 10).
#pragma once

#include <vector>

#include "etchguard/core.hpp"

namespace etchguard {

inline i128 rect_area(const Rect& r) { return i128(r.xhi - r.xlo) * i128(r.yhi - r.ylo); }

// Same-layer contact: positive-area overlap or a shared edge of positive length.
inline bool edge_touch(const Rect& a, const Rect& b) {
  i64 ix = std::min(a.xhi, b.xhi) - std::max(a.xlo, b.xlo);
  i64 iy = std::min(a.yhi, b.yhi) - std::max(a.ylo, b.ylo);
  return ix >= 0 && iy >= 0 && (ix > 0 || iy > 0);
}

// Positive-area overlap (a cut landing on metal).
inline bool overlap(const Rect& a, const Rect& b) {
  return std::min(a.xhi, b.xhi) > std::max(a.xlo, b.xlo) && std::min(a.yhi, b.yhi) > std::max(a.ylo, b.ylo);
}

// Closed rectangles meet (any common point).
inline bool meets(const Rect& a, const Rect& b) {
  return a.xlo <= b.xhi && b.xlo <= a.xhi && a.ylo <= b.yhi && b.ylo <= a.yhi;
}

inline bool intersection(const Rect& a, const Rect& b, Rect& out) {
  out = {std::max(a.xlo, b.xlo), std::max(a.ylo, b.ylo), std::min(a.xhi, b.xhi), std::min(a.yhi, b.yhi)};
  return out.xlo < out.xhi && out.ylo < out.yhi;
}

// P(a) + P(b) - P(a | b) for two rectangles.
inline i128 shared_perimeter(const Rect& a, const Rect& b) {
  i64 ix = std::min(a.xhi, b.xhi) - std::max(a.xlo, b.xlo);
  i64 iy = std::min(a.yhi, b.yhi) - std::max(a.ylo, b.ylo);
  if (ix >= 0 && iy >= 0) return 2 * (i128(ix) + i128(iy));
  return 0;
}

struct Measures {
  i128 area = 0;
  i128 perimeter = 0;
};

// Buffers of the sweep, kept by a caller that sweeps often (a net's what-if).
struct SweepBuffers {
  std::vector<i64> xs;
  std::vector<Rect> by_start, active;
  std::vector<std::pair<i64, i64>> previous, current;
  std::vector<std::pair<i64, int>> points;
};

// Exact area (DBU^2) and perimeter (DBU, holes included) of a union of rectangles.
Measures union_measures(const std::vector<Rect>& rects, SweepBuffers& buffers);
Measures union_measures(const std::vector<Rect>& rects);

inline bool valid_rect(const Rect& r) {
  return r.xlo < r.xhi && r.ylo < r.yhi && r.xlo > -kCoordLimit && r.yhi < kCoordLimit &&
         r.ylo > -kCoordLimit && r.xhi < kCoordLimit;
}

}  // namespace etchguard
