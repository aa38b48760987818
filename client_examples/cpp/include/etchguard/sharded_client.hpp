// A C++ client for a farm of etchguard shards: every call goes straight to the shard
// that holds its net (ShardOf, shards.hpp), with no proxy on the path.
//
//   auto topology = etchguard::client::LoadTopology("etchguard.topology");
//   etchguard::client::ShardedClient farm(topology);   // asks every shard GetTopology
//   farm.OpenNet("blk_r/n1", pins);
//   auto session = farm.OpenSession();                  // one per router thread
//   session.Score("blk_r/n1", candidate);
//   for (const auto& report : farm.CheckAll()) ...      // every shard, merged
//
// At connect every shard is asked GetTopology with this client's fingerprint and the
// index it expects there; a shard with another topology file, or at another index,
// refuses (ServiceError, FAILED_PRECONDITION) before any call is routed.
#pragma once

#include <memory>
#include <string>
#include <vector>

#include "etchguard/client.hpp"
#include "etchguard/shards.hpp"
#include "etchguard/v1/shards.grpc.pb.h"

namespace etchguard::client {

class ShardedClient;

// One ordered stream per shard, opened when first needed. Not thread-safe: one per
// router thread. Requests on one shard keep their order; across shards none is kept.
class ShardedSession {
 public:
  explicit ShardedSession(ShardedClient& farm);

  std::vector<std::uint64_t> OpenNet(const std::string& net, const std::vector<pb::Pin>& pins,
                                     const std::vector<pb::Shape>& shapes = {});
  std::vector<std::uint64_t> Commit(const std::string& net, const std::vector<pb::Shape>& shapes);
  pb::ShapeIds CommitIfLegal(const std::string& net, const std::vector<pb::Shape>& shapes);
  std::uint32_t Remove(const std::string& net, const std::vector<std::uint64_t>& shape_ids);
  pb::ScoreReply Score(const std::string& net, const std::vector<pb::Shape>& candidate,
                       bool without_changes = false);
  pb::ScoreBatchReply ScoreBatch(const std::string& net, const CandidateBatch& batch,
                                 bool details = false);
  pb::NetReport Check(const std::string& net);
  void CloseNet(const std::string& net);
  // The stream of a net's shard (opened on first use), for ops with their own helpers.
  Session& For(const std::string& net);

 private:
  ShardedClient* farm_;
  std::vector<std::unique_ptr<Session>> streams_;  // by shard index
};

class ShardedClient {
 public:
  explicit ShardedClient(Topology topology,
                         std::chrono::milliseconds timeout = std::chrono::seconds(30),
                         bool connect = true);

  // GetTopology on every shard with this client's fingerprint and expected index;
  // throws ServiceError (FAILED_PRECONDITION) on a mismatch.
  std::vector<pb::TopologyInfo> Connect();

  const Topology& topology() const { return topology_; }
  std::int32_t ShardOf(const std::string& net) const { return topology_.ShardOf(net); }
  Client& For(const std::string& net) { return *shards_[ShardOf(net)]; }
  Client& Shard(std::int32_t k) { return *shards_.at(static_cast<std::size_t>(k)); }

  // The deck goes to every shard.
  pb::DeckInfo LoadDeck(const std::string& toml);
  const pb::DeckInfo& Deck() { return shards_[0]->Deck(); }

  std::vector<std::uint64_t> OpenNet(const std::string& net, const std::vector<pb::Pin>& pins,
                                     const std::vector<pb::Shape>& shapes = {}) {
    return For(net).OpenNet(net, pins, shapes);
  }
  std::vector<std::uint64_t> Commit(const std::string& net, const std::vector<pb::Shape>& shapes) {
    return For(net).Commit(net, shapes);
  }
  pb::ShapeIds CommitIfLegal(const std::string& net, const std::vector<pb::Shape>& shapes) {
    return For(net).CommitIfLegal(net, shapes);
  }
  std::uint32_t Remove(const std::string& net, const std::vector<std::uint64_t>& shape_ids) {
    return For(net).Remove(net, shape_ids);
  }
  void CloseNet(const std::string& net) { For(net).CloseNet(net); }
  pb::ScoreReply Score(const std::string& net, const std::vector<pb::Shape>& candidate,
                       bool without_changes = false) {
    return For(net).Score(net, candidate, without_changes);
  }
  pb::ScoreBatchReply ScoreBatch(const std::string& net, const CandidateBatch& batch,
                                 bool details = false) {
    return For(net).ScoreBatch(net, batch, details);
  }
  pb::HeadroomReply Headroom(const std::string& net, const std::string& layer, std::int64_t x,
                             std::int64_t y) {
    return For(net).Headroom(net, layer, x, y);
  }
  pb::NetReport Check(const std::string& net) { return For(net).Check(net); }

  // An area no new shape may use, declared on every shard so advice on any net treats
  // it as blocked; its id. Shard 0 picks the id and every other shard is asked for the
  // same one, so any farm client can RemoveBlockage it. A shard's refusal is undone on
  // the shards before it and rethrown; when a shard may still hold it (its reply lost,
  // or an undo failed) the ServiceError (field "blockage_id") names the shards and the
  // id RemoveBlockage takes to clear them.
  std::uint64_t DeclareBlockage(const pb::Shape& area);
  // Removes it from every shard (a shard's NOT_FOUND: removed already); NOT_FOUND when
  // no shard held it; a shard that refuses or cannot be reached is named, and calling
  // again retries.
  void RemoveBlockage(std::uint64_t blockage_id);

  // Every shard's reports (shard 0's first, then shard 1's, ...).
  std::vector<pb::NetReport> CheckAll(bool violations_only = false);
  // Counts summed over the shards, the shortest uptime, shard 0's deck and version.
  pb::Stats Stats();

  ShardedSession OpenSession() { return ShardedSession(*this); }

 private:
  // Removes the blockage from shards [0, count): the shards that may still hold it, the
  // first failure (set when any), and whether any shard removed it.
  struct Removal {
    std::vector<std::size_t> left;
    std::unique_ptr<ServiceError> failure;
    bool found = false;
  };
  Removal RemoveFromShards(std::uint64_t blockage_id, std::size_t count);

  Topology topology_;
  std::chrono::milliseconds timeout_;
  std::vector<std::unique_ptr<Client>> shards_;
};

}  // namespace etchguard::client
