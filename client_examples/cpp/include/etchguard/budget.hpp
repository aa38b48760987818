// A component's budget, asked once and evaluated by the router itself.
//
//   pb::BudgetReply reply = etchguard::client::Budget(client, net, "M2", x, y, partial_path);
//   etchguard::client::LocalBudget budget(reply);
//   if (auto score = budget.Evaluate({RectShape("M2", run_box)})) { ... score->cost ... }
//   else { /* not covered (a merge, another layer, a via): ask the service */ }
//
// The reply's terms make every ratio the addition reaches a function of the added
// area and perimeter (see BudgetReply in etchguard.proto); Evaluate() measures what a
// candidate adds to the component's union on the layer, exactly, and returns the
// figures the service's score of common + candidate would give, or nothing when the
// budget does not cover the candidate:
//   * a shape on another layer (a via, a jump), or outside the reply's window;
//   * a shape touching a `foreign` rectangle (it would merge another component);
//   * a shape not connected on the layer to the component (it would start a new one).
#pragma once

#include <cstdint>
#include <optional>
#include <string>
#include <utility>
#include <vector>

#include "etchguard/client.hpp"

namespace etchguard::client {

// The ScoreReply figures of common + a covered candidate (no per-ratio detail).
struct LocalScore {
  double worst_change_utilization;
  double worst_utilization;
  bool legal;
  bool breaks_limit;
  double cost;
  double added_area_um2;
};

class LocalBudget {
 public:
  // Throws std::invalid_argument when the reply found no component.
  explicit LocalBudget(const pb::BudgetReply& reply);

  // Whether the budget answers this extension exactly (see the header comment).
  bool Covers(const std::vector<pb::Shape>& shapes) const;
  // The service's figures for common + `shapes`, or nothing when not covered.
  std::optional<LocalScore> Evaluate(const std::vector<pb::Shape>& shapes) const;
  // The figures for a covered extension adding `area_dbu2` of union area and
  // `perimeter_dbu` of union perimeter on the layer.
  LocalScore EvaluateAdded(double area_dbu2, double perimeter_dbu) const;
  // The server's router cost at a utilization (the reply's cost curve).
  double Cost(double utilization) const;
  // (area DBU^2, perimeter DBU) the boxes add to the component's union on the layer.
  std::pair<double, double> Added(const std::vector<Box>& boxes) const;

 private:
  struct Term {
    double conductor, per_area, per_perimeter, factor, credit, gate;
    double Value(double area_um2, double perimeter_um) const;
  };
  struct Ratio {
    int term;  // -1: constant
    double spent, floor, limit;
    bool always;
    int step;
  };
  // A step's ratios count when one of its watches moves off its held value.
  struct Watch {
    int term;  // -1: constant
    double spent, floor, held;
    int step;
  };
  std::string layer_;
  double scale_area_, scale_length_;
  std::vector<Term> terms_;
  std::vector<Ratio> ratios_;
  std::vector<Watch> watches_;
  double rest_, fixed_, common_added_;
  std::vector<Box> own_, connects_, same_layer_, other_layer_;
  Box window_;
  pb::CostCurve curve_;
};

// Exact area (DBU^2) and perimeter (DBU, holes included) of a union of boxes.
std::pair<double, double> UnionMeasures(const std::vector<Box>& boxes);

pb::BudgetRequest BudgetRequest(const std::string& net, const std::string& layer, std::int64_t x, std::int64_t y,
                                const std::vector<pb::Shape>& common = {},
                                const std::optional<Box>& window = std::nullopt);
// The Budget call, unary and as a session op; throws ServiceError when refused.
pb::BudgetReply Budget(Client& client, const pb::BudgetRequest& request);
pb::BudgetReply Budget(Session& session, const pb::BudgetRequest& request);

}  // namespace etchguard::client
