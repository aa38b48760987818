// The sharding client against a farm: opens nets on their shards, streams and unary
// calls routed by net, CheckAll and Stats merged, and a topology mismatch refused at
// connect. Prints one "key value" line per figure (doubles with 17 significant digits);
// tests/test_cpp_sharded.py compares them with the same calls to one plain server.
//   etchguard_sharded_example TOPOLOGY_FILE [NET_PREFIX]
#include <cstdio>
#include <iostream>
#include <string>

#include "etchguard/sharded_client.hpp"

namespace ec = etchguard::client;

namespace {

constexpr int kNets = 6;

void Print(const std::string& key, double value) { std::printf("%s %.17g\n", key.c_str(), value); }
void Print(const std::string& key, const std::string& value) { std::printf("%s %s\n", key.c_str(), value.c_str()); }

}  // namespace

int main(int argc, char** argv) {
  if (argc < 2) {
    std::cerr << "usage: " << argv[0] << " TOPOLOGY_FILE [NET_PREFIX]\n";
    return 2;
  }
  const std::string prefix = argc > 2 ? argv[2] : "blk_s";
  try {
    ec::Topology topology = ec::LoadTopology(argv[1]);
    std::printf("fingerprint %016llx\n", static_cast<unsigned long long>(topology.Fingerprint()));
    ec::ShardedClient farm(topology);
    const auto& deck = farm.Deck();
    auto session = farm.OpenSession();
    for (int i = 0; i < kNets; ++i) {
      const std::string net = prefix + "/n" + std::to_string(i);
      const std::int64_t x0 = 40000LL * i;
      Print("shard_of." + net, std::to_string(farm.ShardOf(net)));
      session.OpenNet(net, {ec::GatePin("u" + std::to_string(i) + ".a", "M1", {x0, 0, x0 + 200, 200}, 0.05),
                            ec::DiffusionPin("u" + std::to_string(i) + ".y", "M1",
                                             {x0 + 20000, 0, x0 + 20200, 200}, 0.3)});
      std::vector<etchguard::v1::Shape> trunk = {ec::RectShape("M1", {x0, 30, x0 + 5000, 170})};
      for (auto& s : ec::ViaShapes(deck, "V1", x0 + 4900, 100)) trunk.push_back(s);
      auto ids = session.Commit(net, trunk);
      Print("ids." + net, std::to_string(ids.size()) + " " + std::to_string(ids.front()));
      auto riser = ec::RunShape("M2", x0 + 4900, 100, x0 + 4900, 100 + 9000LL * (i + 1));
      auto streamed = session.Score(net, {riser});
      auto unary = farm.Score(net, {riser});
      Print("score." + net + ".worst_utilization", streamed.worst_utilization());
      Print("score." + net + ".cost", streamed.cost());
      Print("score." + net + ".legal", streamed.legal() ? "true" : "false");
      Print("score." + net + ".same_unary", streamed.SerializeAsString() == unary.SerializeAsString() ? "true" : "false");
      ec::CandidateBatch batch;
      for (std::int64_t length : {2000LL, 20000LL, 60000LL}) batch.Add("M2", ec::RunBox(x0 + 4900, 100, x0 + 4900, 100 + length, 200));
      auto scores = session.ScoreBatch(net, batch);
      for (int k = 0; k < scores.cost_size(); ++k) Print("batch." + net + "." + std::to_string(k) + ".cost", scores.cost(k));
      Print("check." + net + ".worst_utilization", farm.Check(net).worst_utilization());
    }
    Print("check_all.reports", std::to_string(farm.CheckAll().size()));
    Print("stats.nets", std::to_string(farm.Stats().nets()));
    // A farm-wide blockage: one id on every shard (asking a shard for that id again is
    // ALREADY_EXISTS there), gone from every shard once removed (the id is free again).
    const auto area = ec::RectShape("M3", {0, 0, 5000, 5000});
    const std::uint64_t blockage = farm.DeclareBlockage(area);
    Print("blockage.id", std::to_string(blockage));
    for (std::int32_t k = 0; k < topology.shards(); ++k) {
      try {
        farm.Shard(k).DeclareBlockage(area, blockage);
        Print("blockage.held." + std::to_string(k), "no");
      } catch (const ec::ServiceError& e) {
        Print("blockage.held." + std::to_string(k), std::to_string(static_cast<int>(e.code())));
      }
    }
    farm.RemoveBlockage(blockage);
    try {
      farm.RemoveBlockage(blockage);
      Print("blockage.removed_again", "ok");
    } catch (const ec::ServiceError& e) {
      Print("blockage.removed_again", std::to_string(static_cast<int>(e.code())) + " " + e.field());
    }
    for (std::int32_t k = 0; k < topology.shards(); ++k) {
      farm.Shard(k).DeclareBlockage(area, blockage);  // free again on every shard
      farm.Shard(k).RemoveBlockage(blockage);
      Print("blockage.free." + std::to_string(k), "yes");
    }
    // The same addresses in another order: every shard refuses at connect.
    ec::Topology swapped = topology;
    std::swap(swapped.addresses[0], swapped.addresses[1]);
    try {
      ec::ShardedClient stale(swapped);
      Print("mismatch.code", "none");
    } catch (const ec::ServiceError& e) {
      Print("mismatch.code", std::to_string(static_cast<int>(e.code())));
      Print("mismatch.field", e.field());
    }
  } catch (const ec::ServiceError& e) {
    std::cerr << "refused: " << e.what() << " (field " << e.field() << ")\n";
    return 1;
  } catch (const std::exception& e) {
    std::cerr << "error: " << e.what() << "\n";
    return 1;
  }
  return 0;
}
