// The thin Python binding of the core (nanobind): plain values and numpy arrays in,
// one core call (with the GIL released), plain values out. No model logic here.
#include <nanobind/nanobind.h>
#include <nanobind/ndarray.h>
#include <nanobind/stl/optional.h>
#include <nanobind/stl/pair.h>
#include <nanobind/stl/string.h>
#include <nanobind/stl/tuple.h>
#include <nanobind/stl/vector.h>

#include <stdexcept>
#include <string>

#include "etchguard/core.hpp"
#include "geometry.hpp"

namespace nb = nanobind;
using namespace nb::literals;
using namespace etchguard;

namespace {

using I64Rows = nb::ndarray<const i64, nb::shape<-1, 4>, nb::c_contig, nb::device::cpu>;
using I64Col = nb::ndarray<const i64, nb::shape<-1>, nb::c_contig, nb::device::cpu>;
using F64Out = nb::ndarray<double, nb::shape<-1>, nb::c_contig, nb::device::cpu>;
using U8Out = nb::ndarray<uint8_t, nb::shape<-1>, nb::c_contig, nb::device::cpu>;

// A batch's result columns, handed in by the caller (numpy arrays it allocated), one
// entry per candidate.
struct BatchOut {
  F64Out worst_change, worst;
  U8Out legal, breaks;
  F64Out cost, added;
  void check(std::size_t n) const {
    if (worst_change.shape(0) != n || worst.shape(0) != n || legal.shape(0) != n || breaks.shape(0) != n ||
        cost.shape(0) != n || added.shape(0) != n)
      throw std::invalid_argument("out: one entry per candidate");
  }
};

// The compiled deck, held for the nets built on it (Model itself is opaque here).
struct DeckHandle {
  std::shared_ptr<const Model> model;
};

Table table(const std::vector<std::pair<double, double>>& points) { return Table{points}; }

// (layer, rects, gate_by_oxide, gate_total, diff, cell [(step, um2)], cell side [(step, um2)],
//  block values [(step, measure, oxide, ratio)], rect layers [step per rect, or none])
using PinTuple = std::tuple<int, std::vector<std::tuple<i64, i64, i64, i64>>, std::vector<double>, double, double,
                            std::vector<std::pair<int, double>>, std::vector<std::pair<int, double>>,
                            std::vector<std::tuple<int, int, int, double>>, std::vector<int>>;

std::vector<PinSpec> pin_specs(const std::vector<PinTuple>& pins) {
  std::vector<PinSpec> out;
  out.reserve(pins.size());
  for (const auto& t : pins) {
    PinSpec p;
    p.layer = std::get<0>(t);
    for (const auto& r : std::get<1>(t))
      p.rects.push_back({std::get<0>(r), std::get<1>(r), std::get<2>(r), std::get<3>(r)});
    p.gate_by_oxide = std::get<2>(t);
    p.gate_total_um2 = std::get<3>(t);
    p.diff_um2 = std::get<4>(t);
    p.cell_um2 = std::get<5>(t);
    p.cell_side_um2 = std::get<6>(t);
    for (const auto& [step, measure, oxide, ratio] : std::get<7>(t)) {
      if (measure != 0 && measure != 1) throw std::invalid_argument("pins.block_car: measure 0 (area) or 1 (side)");
      p.block_car.push_back({step, Measure(measure), oxide, ratio});
    }
    p.rect_layers = std::get<8>(t);
    out.push_back(std::move(p));
  }
  return out;
}

std::vector<Shape> shape_rows(const nb::ndarray<const int, nb::shape<-1>, nb::c_contig, nb::device::cpu>& layers,
                              const I64Rows& rects) {
  if (layers.shape(0) != rects.shape(0)) throw std::invalid_argument("layers: one layer per rectangle");
  std::vector<Shape> shapes(rects.shape(0));
  const i64* r = rects.data();
  for (std::size_t i = 0; i < shapes.size(); ++i)
    shapes[i] = {layers.data()[i], {r[4 * i], r[4 * i + 1], r[4 * i + 2], r[4 * i + 3]}};
  return shapes;
}

// Shape objects (anything with an int `layer` and a tuple `rect` of four ints) read
// straight from Python, without an intermediate list of tuples; bools and floats are
// refused (TypeError naming the index), range and emptiness are the core's to check.
i64 exact_int(PyObject* o, std::size_t i, const char* what) {
  if (!PyLong_CheckExact(o)) throw nb::type_error(("shapes[" + std::to_string(i) + "]." + what + ": not an int").c_str());
  int overflow = 0;
  long long v = PyLong_AsLongLongAndOverflow(o, &overflow);
  if (overflow) throw nb::value_error(("shapes[" + std::to_string(i) + "]." + what + ": outside int64").c_str());
  return v;
}

std::vector<Shape> shape_objects(nb::handle seq) {
  static nb::str layer_name("layer"), rect_name("rect");
  nb::sequence items = nb::borrow<nb::sequence>(seq);
  const std::size_t n = nb::len(items);
  std::vector<Shape> out(n);
  for (std::size_t i = 0; i < n; ++i) {
    nb::object item = items[i];
    nb::object layer = nb::getattr(item, layer_name);
    nb::object rect = nb::getattr(item, rect_name);
    if (!PyTuple_CheckExact(rect.ptr()) || PyTuple_GET_SIZE(rect.ptr()) != 4)
      throw nb::type_error(("shapes[" + std::to_string(i) + "].rect: not a tuple of four ints").c_str());
    PyObject* r = rect.ptr();
    out[i] = {int(exact_int(layer.ptr(), i, "layer")),
              {exact_int(PyTuple_GET_ITEM(r, 0), i, "rect"), exact_int(PyTuple_GET_ITEM(r, 1), i, "rect"),
               exact_int(PyTuple_GET_ITEM(r, 2), i, "rect"), exact_int(PyTuple_GET_ITEM(r, 3), i, "rect")}};
  }
  return out;
}

// A 128-bit integer as a Python int, through its decimal digits.
nb::object python_int(i128 v) {
  const bool negative = v < 0;
  unsigned __int128 u = negative ? -static_cast<unsigned __int128>(v) : static_cast<unsigned __int128>(v);
  char digits[48];
  char* end = digits + sizeof(digits) - 1;
  char* p = end;
  *p = '\0';
  do {
    *--p = char('0' + int(u % 10));
    u /= 10;
  } while (u != 0);
  if (negative) *--p = '-';
  return nb::steal(PyLong_FromString(p, nullptr, 10));
}

void check_status(Status s) {
  switch (s) {
    case Status::Ok: return;
    case Status::BadLayer: throw std::invalid_argument("layer: unknown layer");
    case Status::BadRect: throw std::invalid_argument("rect: empty, inverted or outside +-2^62 DBU");
    case Status::DuplicateId: throw std::invalid_argument("shape_ids: an id is held already or listed twice");
    case Status::UnknownId: throw std::invalid_argument("shape_ids: no such shape");
  }
}

using Changes = std::vector<std::tuple<int, int, int, int, double, double, double, int, bool, double, double, double,
                                       bool, double>>;

nb::tuple score_tuple(const Score& sc) {
  std::vector<std::pair<int, double>> added;
  for (std::size_t s = 0; s < sc.adds_on.size(); ++s)
    if (sc.adds_on[s]) added.push_back({int(s), sc.added_area_um2[s]});
  Changes changes;
  for (const RatioChange& c : sc.changes)
    changes.push_back({c.after.step, int(c.after.measure), int(c.after.kind), c.after.oxide, c.after.ratio,
                       c.after.limit, c.after.utilization, c.after.gate, c.has_before, c.before_ratio,
                       c.before_utilization, c.headroom_um2, c.has_length, c.headroom_length_um});
  return nb::make_tuple(added, sc.worst_change_utilization, sc.worst_utilization, sc.legal, sc.breaks_limit,
                        sc.cost, changes);
}

}  // namespace

NB_MODULE(_core, m) {
  m.doc() = "etchguard's compiled ratio core (see core/include/etchguard/core.hpp)";
  m.def("core_version", &core_version);
  // Exact (area DBU^2, perimeter DBU) of a union of rectangles, as Python ints (the
  // figures may pass 64 bits).
  m.def("union_measures", [](const std::vector<std::tuple<i64, i64, i64, i64>>& rows) {
    std::vector<Rect> rects;
    rects.reserve(rows.size());
    for (const auto& t : rows) rects.push_back({std::get<0>(t), std::get<1>(t), std::get<2>(t), std::get<3>(t)});
    Measures u = union_measures(rects);
    return nb::make_tuple(python_int(u.area), python_int(u.perimeter));
  });
  m.def("cost", [](std::tuple<double, double, double, double, double> c, double u) {
    return CostModel{std::get<0>(c), std::get<1>(c), std::get<2>(c), std::get<3>(c), std::get<4>(c)}.cost(u);
  });

  nb::class_<DeckHandle>(m, "Model");
  // layers: [(cut, thickness_um, wire_width, cumulative_plus_cut)]; rules: see RuleSpec.
  m.def("compile", [](i64 dbu, bool includes_cuts, const std::vector<std::tuple<bool, double, i64, bool>>& layers,
                      const std::vector<std::string>& oxides,
                      const std::vector<std::tuple<int, int, int, bool, double, bool, double, double, bool,
                                                   std::vector<std::pair<double, double>>,
                                                   std::vector<std::pair<double, double>>,
                                                   std::vector<std::pair<double, double>>, double, double>>& rules) {
    DeckSpec d;
    d.dbu_per_micron = dbu;
    d.cumulative_includes_cuts = includes_cuts;
    for (const auto& l : layers) d.layers.push_back({std::get<0>(l), std::get<1>(l), std::get<2>(l), std::get<3>(l)});
    d.oxides = oxides;
    for (const auto& t : rules) {
      RuleSpec r;
      r.step = std::get<0>(t);
      r.measure = Measure(std::get<1>(t));
      r.oxide = std::get<2>(t);
      r.has_partial_max = std::get<3>(t);
      r.partial_max = std::get<4>(t);
      r.has_cumulative_max = std::get<5>(t);
      r.cumulative_max = std::get<6>(t);
      r.area_factor = std::get<7>(t);
      r.factor_with_diode_only = std::get<8>(t);
      r.diode_partial_max = table(std::get<9>(t));
      r.diode_cumulative_max = table(std::get<10>(t));
      r.diode_area_reduction = table(std::get<11>(t));
      r.diode_gate_factor = std::get<12>(t);
      r.diode_area_credit = std::get<13>(t);
      d.rules.push_back(std::move(r));
    }
    return DeckHandle{compile(d)};
  });

  nb::class_<Net>(m, "Net")
      .def("__init__", [](Net* self, const DeckHandle& deck, const std::vector<PinTuple>& pins) {
        new (self) Net(deck.model, pin_specs(pins));
      })
      .def("add_shapes", [](Net& net, const std::vector<std::tuple<i64, int, i64, i64, i64, i64>>& rows) {
        std::vector<i64> ids(rows.size());
        std::vector<int> layers(rows.size());
        std::vector<Rect> rects(rows.size());
        for (std::size_t i = 0; i < rows.size(); ++i) {
          const auto& t = rows[i];
          ids[i] = std::get<0>(t);
          layers[i] = std::get<1>(t);
          rects[i] = {std::get<2>(t), std::get<3>(t), std::get<4>(t), std::get<5>(t)};
        }
        Status st;
        {
          nb::gil_scoped_release unlocked;
          st = net.add_many(ids.data(), layers.data(), rects.data(), rows.size());
        }
        check_status(st);
      })
      .def("remove", [](Net& net, const std::vector<i64>& ids) {
        Status st;
        {
          nb::gil_scoped_release unlocked;
          st = net.remove(ids.data(), ids.size());
        }
        check_status(st);
      })
      .def_prop_ro("shape_count", &Net::shape_count)
      .def("has_shape", &Net::has_shape)
      .def("memory_bytes", &Net::memory_bytes)
      .def("shapes", [](const Net& net) {
        std::vector<i64> ids;
        std::vector<int> layers;
        std::vector<Rect> rects;
        net.shapes(ids, layers, rects);
        std::vector<std::tuple<i64, int, i64, i64, i64, i64>> out;
        out.reserve(ids.size());
        for (std::size_t i = 0; i < ids.size(); ++i)
          out.push_back({ids[i], layers[i], rects[i].xlo, rects[i].ylo, rects[i].xhi, rects[i].yhi});
        return out;
      })
      .def("score", [](const Net& net, nb::handle cands, bool detail,
                       std::tuple<double, double, double, double, double> costs, const std::vector<PinTuple>& extra) {
        std::vector<Shape> shapes = shape_objects(cands);
        std::vector<PinSpec> pins = pin_specs(extra);
        CostModel cm{std::get<0>(costs), std::get<1>(costs), std::get<2>(costs), std::get<3>(costs), std::get<4>(costs)};
        Score sc;
        {
          nb::gil_scoped_release unlocked;
          sc = net.score(shapes.data(), shapes.size(), detail, cm, pins.data(), pins.size());
        }
        return score_tuple(sc);
      })
      // A detailed score reduced to its most_excess: the score's figures as `score`
      // gives them, its changes replaced by that one number (the changes are not built
      // as Python objects, which is most of a detailed score's cost).
      .def("score_excess", [](const Net& net, nb::handle cands,
                              std::tuple<double, double, double, double, double> costs,
                              const std::vector<PinTuple>& extra) {
        std::vector<Shape> shapes = shape_objects(cands);
        std::vector<PinSpec> pins = pin_specs(extra);
        CostModel cm{std::get<0>(costs), std::get<1>(costs), std::get<2>(costs), std::get<3>(costs), std::get<4>(costs)};
        Score sc;
        double most = 0.0;
        {
          nb::gil_scoped_release unlocked;
          sc = net.score(shapes.data(), shapes.size(), true, cm, pins.data(), pins.size());
          most = most_excess(sc);
        }
        sc.changes.clear();
        return nb::make_tuple(score_tuple(sc), most);
      })
      .def("score_batch", [](const Net& net, const nb::ndarray<const int, nb::shape<-1>, nb::c_contig, nb::device::cpu>& layers,
                             const I64Rows& rects, std::optional<I64Col> counts,
                             std::tuple<double, double, double, double, double> costs, F64Out worst_change,
                             F64Out worst, U8Out legal, U8Out breaks, F64Out cost, F64Out added) {
        std::vector<Shape> shapes = shape_rows(layers, rects);
        const std::size_t n = counts ? counts->shape(0) : shapes.size();
        const BatchOut out{worst_change, worst, legal, breaks, cost, added};
        out.check(n);
        const i64* cs = counts ? counts->data() : nullptr;
        CostModel cm{std::get<0>(costs), std::get<1>(costs), std::get<2>(costs), std::get<3>(costs), std::get<4>(costs)};
        nb::gil_scoped_release unlocked;
        net.score_batch(shapes.data(), shapes.size(), cs, n, cm, worst_change.data(), worst.data(), legal.data(),
                        breaks.data(), cost.data(), added.data());
      },
      // No conversion: a float or a narrower column must be refused, not truncated, and a
      // result column must be the caller's own array, not a converted copy.
      "layers"_a.noconvert(), "rects"_a.noconvert(), "counts"_a.noconvert().none(), "costs"_a,
      "worst_change"_a.noconvert(), "worst"_a.noconvert(), "legal"_a.noconvert(), "breaks"_a.noconvert(),
      "cost"_a.noconvert(), "added"_a.noconvert())
      .def("score_batch_common", [](const Net& net, const nb::ndarray<const int, nb::shape<-1>, nb::c_contig, nb::device::cpu>& layers,
                                    const I64Rows& rects, const I64Col& counts,
                                    const nb::ndarray<const int, nb::shape<-1>, nb::c_contig, nb::device::cpu>& common_layers,
                                    const I64Rows& common_rects, const I64Col& common_counts, const I64Col& part_of,
                                    std::tuple<double, double, double, double, double> costs, F64Out worst_change,
                                    F64Out worst, U8Out legal, U8Out breaks, F64Out cost, F64Out added) {
        std::vector<Shape> shapes = shape_rows(layers, rects);
        std::vector<Shape> common = shape_rows(common_layers, common_rects);
        const std::size_t n = counts.shape(0);
        const BatchOut out{worst_change, worst, legal, breaks, cost, added};
        out.check(n);
        if (part_of.shape(0) != n) throw std::invalid_argument("common.part: one entry per candidate");
        CostModel cm{std::get<0>(costs), std::get<1>(costs), std::get<2>(costs), std::get<3>(costs), std::get<4>(costs)};
        nb::gil_scoped_release unlocked;
        net.score_batch_common(shapes.data(), shapes.size(), counts.data(), n, common.data(), common.size(),
                               common_counts.data(), common_counts.shape(0), part_of.data(), cm, worst_change.data(),
                               worst.data(), legal.data(), breaks.data(), cost.data(), added.data());
      },
      "layers"_a.noconvert(), "rects"_a.noconvert(), "counts"_a.noconvert(), "common_layers"_a.noconvert(),
      "common_rects"_a.noconvert(), "common_counts"_a.noconvert(), "part_of"_a.noconvert(), "costs"_a,
      "worst_change"_a.noconvert(), "worst"_a.noconvert(), "legal"_a.noconvert(), "breaks"_a.noconvert(),
      "cost"_a.noconvert(), "added"_a.noconvert())
      .def("check", [](const Net& net) {
        Report r;
        {
          nb::gil_scoped_release unlocked;
          r = net.check();
        }
        std::vector<std::tuple<int, int, int, int, double, double, double, int>> checks;
        for (const Check& c : r.checks)
          checks.push_back({c.step, int(c.measure), int(c.kind), c.oxide, c.ratio, c.limit, c.utilization, c.gate});
        return nb::make_tuple(r.worst_utilization, r.legal, checks);
      })
      .def("offences", [](const Net& net) {
        std::vector<std::tuple<int, int, int, int, double, double, double, int, std::vector<i64>, std::vector<int>>> out;
        for (const Offence& o : net.offences())
          out.push_back({o.check.step, int(o.check.measure), int(o.check.kind), o.check.oxide, o.check.ratio,
                         o.check.limit, o.check.utilization, o.check.gate, o.shape_ids, o.pins});
        return out;
      })
      .def("worst_at", &Net::worst_at)
      .def("headroom", [](const Net& net, int layer, i64 x, i64 y) {
        Headroom h = net.headroom(layer, x, y);
        return nb::make_tuple(h.found, h.area_um2, h.side_um2, h.length_um, h.bind_step, int(h.bind_kind),
                              int(h.bind_measure), h.bind_oxide, h.bind_gate);
      })
      .def("budget", [](const Net& net, int layer, i64 x, i64 y,
                        const std::vector<std::tuple<int, i64, i64, i64, i64>>& common,
                        std::tuple<i64, i64, i64, i64> window) {
        std::vector<Shape> shapes;
        shapes.reserve(common.size());
        for (const auto& c : common)
          shapes.push_back({std::get<0>(c), {std::get<1>(c), std::get<2>(c), std::get<3>(c), std::get<4>(c)}});
        const Rect w{std::get<0>(window), std::get<1>(window), std::get<2>(window), std::get<3>(window)};
        Budget b;
        {
          nb::gil_scoped_release unlocked;
          b = net.budget(layer, x, y, shapes.data(), shapes.size(), w);
        }
        using R4 = std::tuple<i64, i64, i64, i64>;
        auto rect4 = [](const Rect& r) { return R4{r.xlo, r.ylo, r.xhi, r.yhi}; };
        std::vector<std::tuple<int, int, double, double, double, double, double, double>> terms;
        for (const BudgetTerm& t : b.terms)
          terms.push_back({int(t.measure), t.oxide, t.conductor, t.per_area, t.per_perimeter, t.factor, t.credit,
                           t.gate});
        std::vector<std::tuple<int, int, int, int, double, int, double, double, bool, int>> ratios;
        for (const BudgetRatio& r : b.ratios)
          ratios.push_back({r.step, int(r.measure), int(r.kind), r.oxide, r.limit, r.term, r.spent, r.floor,
                            r.always, r.gate});
        std::vector<std::tuple<int, int, double, double, double>> watches;
        for (const BudgetWatch& w : b.watches) watches.push_back({w.step, w.term, w.spent, w.floor, w.held});
        std::vector<R4> own, own_pins;
        for (const Rect& r : b.own) own.push_back(rect4(r));
        for (const Rect& r : b.own_pins) own_pins.push_back(rect4(r));
        std::vector<std::pair<int, R4>> foreign;
        for (const auto& f : b.foreign) foreign.push_back({f.first, rect4(f.second)});
        return nb::make_tuple(b.found, terms, ratios, watches, b.rest_worst, b.fixed_change, b.common_added_um2, own,
                              own_pins, foreign);
      })
      .def("touching", [](const Net& net, int layer, std::tuple<i64, i64, i64, i64> r) {
        std::vector<std::pair<int, int>> out;
        for (const Toucher& t : net.touching(layer, {std::get<0>(r), std::get<1>(r), std::get<2>(r), std::get<3>(r)}))
          out.push_back({t.element, t.step});
        return out;
      })
      .def("reaches_gate", &Net::reaches_gate)
      .def("pin_diffusion", &Net::pin_diffusion)
      .def("near", [](const Net& net, int layer, std::tuple<i64, i64, i64, i64> r) {
        std::vector<std::tuple<i64, i64, i64, i64>> out;
        for (const Rect& q : net.near(layer, {std::get<0>(r), std::get<1>(r), std::get<2>(r), std::get<3>(r)}))
          out.push_back({q.xlo, q.ylo, q.xhi, q.yhi});
        return out;
      })
      .def("element", [](const Net& net, int e) {
        Net::ElementInfo info = net.element(e);
        return nb::make_tuple(info.layer, nb::make_tuple(info.rect.xlo, info.rect.ylo, info.rect.xhi, info.rect.yhi),
                              info.shape_id);
      });
}
