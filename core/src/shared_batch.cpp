// Batches whose candidates share shapes (Net::score_batch_common).
//
// A search asks about many extensions of one partial path: the path travels once per
// message as a shared part, and each candidate is its part followed by its own shapes.
// What is built once per message: the parts' row ranges, checked against the counts,
// and one reusable buffer; each candidate is then scored as the contiguous shapes
// part + own by score_batch itself, so the figures are those of the candidate sent
// whole, to the bit.
#include <stdexcept>
#include <vector>

#include "state.hpp"

namespace etchguard {

void Net::score_batch_common(const Shape* shapes, std::size_t n_shapes, const i64* counts,
                             std::size_t n_candidates, const Shape* common, std::size_t n_common,
                             const i64* common_counts, std::size_t n_parts, const i64* part_of,
                             const CostModel& costs, double* worst_change, double* worst,
                             std::uint8_t* legal, std::uint8_t* breaks, double* cost,
                             double* added_um2) const {
  std::vector<std::size_t> part_start(n_parts + 1, 0);
  for (std::size_t k = 0; k < n_parts; ++k) {
    if (common_counts[k] < 1) throw std::invalid_argument("common.shape_count: a part needs at least one shape");
    part_start[k + 1] = part_start[k] + std::size_t(common_counts[k]);
  }
  if (part_start[n_parts] != n_common)
    throw std::invalid_argument("common.shape_count: counts do not match the common rows");
  std::vector<Shape> whole;
  std::size_t at = 0;
  for (std::size_t i = 0; i < n_candidates; ++i) {
    const std::size_t take = counts ? std::size_t(counts[i]) : 1;
    if (take == 0 || at + take > n_shapes) throw std::invalid_argument("shape_count: counts do not match the rows");
    const i64 part = part_of ? part_of[i] : -1;
    if (part < -1 || part >= i64(n_parts)) throw std::invalid_argument("common.part: no such part");
    whole.clear();
    if (part >= 0)
      whole.insert(whole.end(), common + part_start[std::size_t(part)], common + part_start[std::size_t(part) + 1]);
    whole.insert(whole.end(), shapes + at, shapes + at + take);
    at += take;
    const i64 whole_count = i64(whole.size());
    score_batch(whole.data(), whole.size(), &whole_count, 1, costs, worst_change + i, worst + i, legal + i,
                breaks + i, cost + i, added_um2 + i);
  }
  if (at != n_shapes) throw std::invalid_argument("shape_count: counts do not match the rows");
}

}  // namespace etchguard
