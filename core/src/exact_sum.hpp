// Exactly rounded sums of floats, independent of the order terms arrive in.
//
// A sum is kept as Shewchuk's non-overlapping partials (J. R. Shewchuk, "Adaptive
// Precision Floating-Point Arithmetic and Fast Robust Geometric Predicates", 1997), the
// method of Python's math.fsum; value() rounds the exact total once, with fsum's
// half-even correction. Merging two sums adds the partials of one into the other, so a
// component's gate, diffusion and in-cell figures come out the same whatever order its
// pins were joined in, and a commit followed by its removal restores them to the bit.
#pragma once

#include <cmath>
#include <vector>

namespace etchguard {

class ExactSum {
 public:
  void add(double x) {
    std::size_t i = 0;
    for (double y : partials_) {
      if (std::fabs(x) < std::fabs(y)) std::swap(x, y);
      double hi = x + y;
      double lo = y - (hi - x);
      if (lo != 0.0) partials_[i++] = lo;
      x = hi;
    }
    partials_.resize(i);
    if (x != 0.0) partials_.push_back(x);
  }
  void add(const ExactSum& other) {
    for (double p : other.partials_) add(p);
  }
  bool empty() const { return partials_.empty(); }
  void clear() { partials_.clear(); }

  // The exact total rounded to nearest, ties to even (as math.fsum).
  double value() const {
    std::size_t n = partials_.size();
    if (n == 0) return 0.0;
    double hi = partials_[--n], lo = 0.0;
    while (n > 0) {
      double x = hi;
      double y = partials_[--n];
      hi = x + y;
      double yr = hi - x;
      lo = y - yr;
      if (lo != 0.0) break;
    }
    if (n > 0 && ((lo < 0.0 && partials_[n - 1] < 0.0) || (lo > 0.0 && partials_[n - 1] > 0.0))) {
      double y = lo * 2.0;
      double x = hi + y;
      double yr = x - hi;
      if (y == yr) hi = x;
    }
    return hi;
  }

 private:
  std::vector<double> partials_;
};

}  // namespace etchguard
