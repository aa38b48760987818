// etchguard_budget_check: asks budgets and evaluates candidates with LocalBudget, for
// tests and for people checking a router's local figures against the service.
//
//   etchguard_budget_check ADDRESS < input
//
// Input lines (DBU):
//   budget NET LAYER X Y                  a new budget at a point (asked at the first cand)
//   common LAYER XLO YLO XHI YHI          a shape of the budget's common part
//   cand LAYER XLO YLO XHI YHI [...]      a candidate of one or more rectangle shapes
//   repeat N                              evaluate the last candidate N times more
// Output, one line per cand: "declined", or "covered" and the figures
// worst_change_utilization worst_utilization legal breaks_limit cost added_area_um2
// (doubles with 17 significant digits); per repeat: "timed NS", nanoseconds per
// evaluation (for bench.budget_bench). Exit status: 0 done, 1 a call failed.
#include <chrono>
#include <cstdio>
#include <exception>
#include <iostream>
#include <memory>
#include <sstream>
#include <string>
#include <vector>

#include "etchguard/budget.hpp"

namespace eg = etchguard::client;
namespace pb = etchguard::v1;

namespace {

eg::Box ReadBox(std::istringstream& in) {
  eg::Box b{};
  in >> b.xlo >> b.ylo >> b.xhi >> b.yhi;
  return b;
}

int Run(const std::string& address) {
  eg::Client client(address);
  if (!client.WaitReady(std::chrono::seconds(10))) {
    std::fprintf(stderr, "etchguard_budget_check: no server at %s\n", address.c_str());
    return 1;
  }
  pb::BudgetRequest request;
  std::unique_ptr<eg::LocalBudget> budget;
  std::vector<pb::Shape> last;
  std::string line;
  while (std::getline(std::cin, line)) {
    std::istringstream in(line);
    std::string what;
    in >> what;
    if (what == "budget") {
      std::string net, layer;
      std::int64_t x = 0, y = 0;
      in >> net >> layer >> x >> y;
      request = eg::BudgetRequest(net, layer, x, y);
      budget.reset();
    } else if (what == "common") {
      std::string layer;
      in >> layer;
      *request.add_common() = eg::RectShape(layer, ReadBox(in));
    } else if (what == "cand") {
      if (!budget) budget = std::make_unique<eg::LocalBudget>(eg::Budget(client, request));
      std::vector<pb::Shape> shapes;
      std::string layer;
      while (in >> layer) shapes.push_back(eg::RectShape(layer, ReadBox(in)));
      last = shapes;
      const auto score = budget->Evaluate(shapes);
      if (!score) {
        std::printf("declined\n");
        continue;
      }
      std::printf("covered %.17g %.17g %d %d %.17g %.17g\n", score->worst_change_utilization,
                  score->worst_utilization, score->legal ? 1 : 0, score->breaks_limit ? 1 : 0, score->cost,
                  score->added_area_um2);
    } else if (what == "repeat" && budget) {
      long n = 0;
      in >> n;
      double sink = 0.0;  // the figures are used, so the evaluations are not optimized away
      const auto t0 = std::chrono::steady_clock::now();
      for (long i = 0; i < n; ++i) {
        const auto score = budget->Evaluate(last);
        if (score) sink += score->cost;
      }
      const auto t1 = std::chrono::steady_clock::now();
      const double ns = std::chrono::duration<double, std::nano>(t1 - t0).count();
      std::printf("timed %.3f %d\n", n > 0 ? ns / static_cast<double>(n) : 0.0, sink >= 0.0 ? 1 : 0);
    }
  }
  return 0;
}

}  // namespace

int main(int argc, char** argv) {
  if (argc != 2) {
    std::fprintf(stderr, "usage: %s ADDRESS < input\n", argv[0]);
    return 2;
  }
  try {
    return Run(argv[1]);
  } catch (const std::exception& e) {
    std::fprintf(stderr, "etchguard_budget_check: %s\n", e.what());
  }
  return 1;
}
