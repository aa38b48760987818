// Calls routed by net over one channel per shard (see include/etchguard/sharded_client.hpp).
#include "etchguard/sharded_client.hpp"

#include <algorithm>
#include <utility>

namespace etchguard::client {

ShardedClient::ShardedClient(Topology topology, std::chrono::milliseconds timeout, bool connect)
    : topology_(std::move(topology)), timeout_(timeout) {
  for (const std::string& address : topology_.addresses) {
    shards_.push_back(std::make_unique<Client>(address, timeout_));
  }
  if (connect) Connect();
}

std::vector<pb::TopologyInfo> ShardedClient::Connect() {
  std::vector<pb::TopologyInfo> infos;
  for (std::size_t k = 0; k < shards_.size(); ++k) {
    auto stub = pb::ShardService::NewStub(shards_[k]->channel());
    pb::GetTopologyRequest request;
    request.set_expected_fingerprint(topology_.Fingerprint());
    request.set_expected_shard(static_cast<std::uint32_t>(k));
    grpc::ClientContext context;
    shards_[k]->Prepare(context);
    pb::TopologyInfo info;
    ThrowIfRefused(stub->GetTopology(&context, request, &info));
    infos.push_back(std::move(info));
  }
  return infos;
}

pb::DeckInfo ShardedClient::LoadDeck(const std::string& toml) {
  pb::DeckInfo info;
  for (auto& shard : shards_) info = shard->LoadDeck(toml);
  return info;
}

namespace {

std::string ShardList(const std::vector<std::size_t>& shards) {
  std::string out;
  for (std::size_t k : shards) out += (out.empty() ? "" : ", ") + std::string("shard ") + std::to_string(k);
  return out;
}

}  // namespace

std::uint64_t ShardedClient::DeclareBlockage(const pb::Shape& area) {
  const std::uint64_t id = shards_[0]->DeclareBlockage(area);
  for (std::size_t k = 1; k < shards_.size(); ++k) {
    try {
      shards_[k]->DeclareBlockage(area, id);
    } catch (const ServiceError& cause) {
      Removal undo = RemoveFromShards(id, k);
      const bool lost = cause.code() == grpc::StatusCode::UNAVAILABLE;
      if (undo.left.empty() && !lost) throw;
      std::string where = ShardList(undo.left);
      if (lost) where += (where.empty() ? "" : ", ") + std::string("shard ") + std::to_string(k) + " (reply lost)";
      throw ServiceError(cause.code(),
                         "declaring blockage " + std::to_string(id) + " failed on shard " + std::to_string(k) +
                             " (" + cause.what() + ") and it may still be held by " + where +
                             "; RemoveBlockage(" + std::to_string(id) + ") removes it",
                         "blockage_id");
    }
  }
  return id;
}

void ShardedClient::RemoveBlockage(std::uint64_t blockage_id) {
  Removal removal = RemoveFromShards(blockage_id, shards_.size());
  if (removal.failure) {
    throw ServiceError(removal.failure->code(),
                       "blockage " + std::to_string(blockage_id) + " may still be held by " +
                           ShardList(removal.left) + " (" + removal.failure->what() + ")",
                       "blockage_id");
  }
  if (!removal.found) {
    throw ServiceError(grpc::StatusCode::NOT_FOUND, "no shard holds blockage " + std::to_string(blockage_id),
                       "blockage_id");
  }
}

ShardedClient::Removal ShardedClient::RemoveFromShards(std::uint64_t blockage_id, std::size_t count) {
  Removal out;
  for (std::size_t k = 0; k < count; ++k) {
    try {
      shards_[k]->RemoveBlockage(blockage_id);
      out.found = true;
    } catch (const ServiceError& error) {
      if (error.code() == grpc::StatusCode::NOT_FOUND) continue;  // removed already
      out.left.push_back(k);
      if (!out.failure) out.failure = std::make_unique<ServiceError>(error);
    }
  }
  return out;
}

std::vector<pb::NetReport> ShardedClient::CheckAll(bool violations_only) {
  std::vector<pb::NetReport> reports;
  pb::CheckAllRequest request;
  request.set_violations_only(violations_only);
  for (auto& shard : shards_) {
    grpc::ClientContext context;
    shard->Prepare(context);
    auto reader = shard->stub().CheckAll(&context, request);
    for (pb::NetReport report; reader->Read(&report);) reports.push_back(report);
    ThrowIfRefused(reader->Finish());
  }
  return reports;
}

pb::Stats ShardedClient::Stats() {
  pb::Stats total;
  bool first = true;
  for (auto& shard : shards_) {
    pb::Stats s = shard->Stats();
    if (first) {
      total.set_deck(s.deck());
      total.set_version(s.version());
      total.set_uptime_s(s.uptime_s());
      first = false;
    }
    total.set_nets(total.nets() + s.nets());
    total.set_shapes(total.shapes() + s.shapes());
    total.set_hot_nets(total.hot_nets() + s.hot_nets());
    total.set_scores(total.scores() + s.scores());
    total.set_commits(total.commits() + s.commits());
    total.set_removals(total.removals() + s.removals());
    total.set_checks(total.checks() + s.checks());
    total.set_violations_seen(total.violations_seen() + s.violations_seen());
    total.set_uptime_s(std::min(total.uptime_s(), s.uptime_s()));
  }
  return total;
}

// -- ShardedSession ------------------------------------------------------------------------

ShardedSession::ShardedSession(ShardedClient& farm)
    : farm_(&farm), streams_(static_cast<std::size_t>(farm.topology().shards())) {}

Session& ShardedSession::For(const std::string& net) {
  auto& stream = streams_[static_cast<std::size_t>(farm_->ShardOf(net))];
  if (!stream) stream = std::make_unique<Session>(farm_->For(net).OpenSession());
  return *stream;
}

std::vector<std::uint64_t> ShardedSession::OpenNet(const std::string& net, const std::vector<pb::Pin>& pins,
                                                   const std::vector<pb::Shape>& shapes) {
  return For(net).OpenNet(net, pins, shapes);
}

std::vector<std::uint64_t> ShardedSession::Commit(const std::string& net, const std::vector<pb::Shape>& shapes) {
  return For(net).Commit(net, shapes);
}

pb::ShapeIds ShardedSession::CommitIfLegal(const std::string& net, const std::vector<pb::Shape>& shapes) {
  return For(net).CommitIfLegal(net, shapes);
}

std::uint32_t ShardedSession::Remove(const std::string& net, const std::vector<std::uint64_t>& shape_ids) {
  return For(net).Remove(net, shape_ids);
}

pb::ScoreReply ShardedSession::Score(const std::string& net, const std::vector<pb::Shape>& candidate,
                                     bool without_changes) {
  return For(net).Score(net, candidate, without_changes);
}

pb::ScoreBatchReply ShardedSession::ScoreBatch(const std::string& net, const CandidateBatch& batch,
                                               bool details) {
  return For(net).ScoreBatch(net, batch, details);
}

pb::NetReport ShardedSession::Check(const std::string& net) { return For(net).Check(net); }

void ShardedSession::CloseNet(const std::string& net) { For(net).CloseNet(net); }

}  // namespace etchguard::client
