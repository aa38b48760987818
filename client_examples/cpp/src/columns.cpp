// Request builders: shapes, pins, vias and columnar candidate batches.
#include <algorithm>
#include <stdexcept>
#include <string>

#include "etchguard/client.hpp"

namespace etchguard::client {

pb::Rect ToRect(const Box& box) {
  pb::Rect r;
  r.set_xlo(box.xlo);
  r.set_ylo(box.ylo);
  r.set_xhi(box.xhi);
  r.set_yhi(box.yhi);
  return r;
}

pb::Shape RectShape(const std::string& layer, const Box& box) {
  pb::Shape s;
  s.set_layer(layer);
  *s.mutable_rect() = ToRect(box);
  return s;
}

pb::Shape RunShape(const std::string& layer, std::int64_t x1, std::int64_t y1, std::int64_t x2,
                   std::int64_t y2, std::int64_t width, std::optional<std::int64_t> extension) {
  pb::Shape s;
  s.set_layer(layer);
  pb::Run* run = s.mutable_run();
  run->set_x1(x1);
  run->set_y1(y1);
  run->set_x2(x2);
  run->set_y2(y2);
  run->set_width(width);
  if (extension) run->set_extension(*extension);
  return s;
}

Box RunBox(std::int64_t x1, std::int64_t y1, std::int64_t x2, std::int64_t y2, std::int64_t width,
           std::optional<std::int64_t> extension) {
  if (width <= 0) throw std::invalid_argument("a run box needs a width > 0 DBU");
  const std::int64_t ext = extension.value_or(width / 2);
  if (ext < 0) throw std::invalid_argument("a run's end extension must be >= 0 DBU");
  const std::int64_t below = width / 2;
  if (y1 == y2) {
    return Box{std::min(x1, x2) - ext, y1 - below, std::max(x1, x2) + ext, y1 - below + width};
  }
  if (x1 == x2) {
    return Box{x1 - below, std::min(y1, y2) - ext, x1 - below + width, std::max(y1, y2) + ext};
  }
  throw std::invalid_argument("a run's centre line must be horizontal or vertical");
}

namespace {
// A square of side `side` centred at (x, y); an odd side leans one DBU up and right,
// as the server's own via builder does.
Box Square(std::int64_t x, std::int64_t y, std::int64_t side) {
  const std::int64_t lo = side / 2;
  return Box{x - lo, y - lo, x - lo + side, y - lo + side};
}
}  // namespace

std::vector<pb::Shape> ViaShapes(const pb::DeckInfo& deck, const std::string& cut_layer,
                                 std::int64_t x, std::int64_t y) {
  const int n = deck.layers_size();
  for (int i = 0; i < n; ++i) {
    const pb::LayerInfo& info = deck.layers(i);
    if (info.name() != cut_layer) continue;
    if (info.kind() != pb::LAYER_KIND_CUT || info.cut_size() <= 0 || i == 0 || i == n - 1) {
      throw std::invalid_argument(cut_layer + " is not a cut layer with a cut_size");
    }
    const std::int64_t pad = info.cut_size() + 2 * info.enclosure();
    return {RectShape(deck.layers(i - 1).name(), Square(x, y, pad)),
            RectShape(cut_layer, Square(x, y, info.cut_size())),
            RectShape(deck.layers(i + 1).name(), Square(x, y, pad))};
  }
  throw std::invalid_argument("unknown layer " + cut_layer);
}

pb::Pin GatePin(const std::string& name, const std::string& layer, const Box& box,
                double gate_area_um2, const std::string& oxide,
                const std::map<std::string, double>& cell_area_um2) {
  pb::Pin p;
  p.set_name(name);
  p.set_layer(layer);
  *p.add_rects() = ToRect(box);
  (*p.mutable_gate_area())[oxide] = gate_area_um2;
  for (const auto& [l, area] : cell_area_um2) (*p.mutable_cell_area())[l] = area;
  return p;
}

pb::Pin DiffusionPin(const std::string& name, const std::string& layer, const Box& box,
                     double diff_area_um2) {
  pb::Pin p;
  p.set_name(name);
  p.set_layer(layer);
  *p.add_rects() = ToRect(box);
  p.set_diff_area(diff_area_um2);
  return p;
}

std::uint32_t CandidateBatch::LayerIndex(const std::string& layer) {
  auto [it, added] = layer_index_.try_emplace(layer, static_cast<std::uint32_t>(layer_index_.size()));
  if (added) columns_.add_layers(layer);
  return it->second;
}

namespace {
void RequireRectangles(const std::vector<pb::Shape>& shapes, const char* what) {
  if (shapes.empty()) throw std::invalid_argument(std::string(what) + " needs at least one shape");
  for (const pb::Shape& s : shapes) {
    if (!s.has_rect()) throw std::invalid_argument(std::string(what) + " shapes are rectangles (layer " + s.layer() + ")");
  }
}
}  // namespace

void CandidateBatch::NotePart(std::uint32_t part_plus_one) {
  if (columns_.common_count_size() == 0) return;  // no parts: the column stays empty
  columns_.add_common_part(part_plus_one);
}

std::size_t CandidateBatch::Add(const std::vector<pb::Shape>& candidate) {
  RequireRectangles(candidate, "a candidate");
  for (const pb::Shape& s : candidate) {
    columns_.add_layer(LayerIndex(s.layer()));
    columns_.add_xlo(s.rect().xlo());
    columns_.add_ylo(s.rect().ylo());
    columns_.add_xhi(s.rect().xhi());
    columns_.add_yhi(s.rect().yhi());
  }
  columns_.add_shape_count(static_cast<std::uint32_t>(candidate.size()));
  NotePart(0);
  return size() - 1;
}

std::size_t CandidateBatch::Add(const std::string& layer, const Box& box) {
  columns_.add_layer(LayerIndex(layer));
  columns_.add_xlo(box.xlo);
  columns_.add_ylo(box.ylo);
  columns_.add_xhi(box.xhi);
  columns_.add_yhi(box.yhi);
  columns_.add_shape_count(1);
  NotePart(0);
  return size() - 1;
}

std::size_t CandidateBatch::AddCommon(const std::vector<pb::Shape>& part) {
  RequireRectangles(part, "a shared part");
  if (columns_.common_count_size() == 0) {
    // From now on every candidate names its part; those before start with none.
    for (std::size_t i = 0; i < size(); ++i) columns_.add_common_part(0);
  }
  for (const pb::Shape& s : part) {
    columns_.add_common_layer(LayerIndex(s.layer()));
    columns_.add_common_xlo(s.rect().xlo());
    columns_.add_common_ylo(s.rect().ylo());
    columns_.add_common_xhi(s.rect().xhi());
    columns_.add_common_yhi(s.rect().yhi());
  }
  columns_.add_common_count(static_cast<std::uint32_t>(part.size()));
  return static_cast<std::size_t>(columns_.common_count_size()) - 1;
}

std::size_t CandidateBatch::Add(const std::vector<pb::Shape>& own, std::size_t part) {
  if (part >= static_cast<std::size_t>(columns_.common_count_size())) {
    throw std::invalid_argument("no shared part " + std::to_string(part));
  }
  const std::size_t index = Add(own);
  columns_.set_common_part(static_cast<int>(index), static_cast<std::uint32_t>(part + 1));
  return index;
}

void CandidateBatch::Clear() {
  columns_.Clear();
  layer_index_.clear();
}

}  // namespace etchguard::client
