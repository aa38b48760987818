// The unary calls and the ordered session stream of etchguard.v1.
#include <utility>

#include "etchguard/client.hpp"

namespace etchguard::client {
namespace {

std::vector<std::uint64_t> Ids(const pb::ShapeIds& reply) {
  return {reply.shape_ids().begin(), reply.shape_ids().end()};
}

template <typename Shapes>
void AddShapes(Shapes* out, const std::vector<pb::Shape>& shapes) {
  out->Reserve(static_cast<int>(shapes.size()));
  for (const pb::Shape& s : shapes) *out->Add() = s;
}

pb::OpenNetRequest OpenNetRequest(const std::string& net, const std::vector<pb::Pin>& pins,
                                  const std::vector<pb::Shape>& shapes) {
  pb::OpenNetRequest r;
  r.set_net(net);
  for (const pb::Pin& p : pins) *r.add_pins() = p;
  AddShapes(r.mutable_shapes(), shapes);
  return r;
}

pb::CommitRequest CommitRequest(const std::string& net, const std::vector<pb::Shape>& shapes,
                                bool only_if_legal = false) {
  pb::CommitRequest r;
  r.set_net(net);
  AddShapes(r.mutable_shapes(), shapes);
  r.set_only_if_legal(only_if_legal);
  return r;
}

pb::RemoveRequest RemoveRequest(const std::string& net, const std::vector<std::uint64_t>& ids) {
  pb::RemoveRequest r;
  r.set_net(net);
  for (std::uint64_t id : ids) r.add_shape_ids(id);
  return r;
}

pb::ScoreRequest ScoreRequest(const std::string& net, const std::vector<pb::Shape>& candidate,
                              bool without_changes) {
  pb::ScoreRequest r;
  r.set_net(net);
  AddShapes(r.mutable_candidate(), candidate);
  r.set_without_changes(without_changes);
  return r;
}

pb::ScoreBatchRequest ScoreBatchRequest(const std::string& net, const CandidateBatch& batch,
                                        bool details) {
  pb::ScoreBatchRequest r;
  r.set_net(net);
  *r.mutable_candidates() = batch.columns();
  r.set_details(details);
  return r;
}

}  // namespace

void ThrowIfRefused(const grpc::Status& status) {
  if (!status.ok()) {
    throw ServiceError(status.error_code(), status.error_message(),
                       FieldOfStatusDetails(status.error_details()));
  }
}

// -- Client -------------------------------------------------------------------------------

Client::Client(const std::string& target, std::chrono::milliseconds timeout)
    : Client(grpc::CreateChannel(target, grpc::InsecureChannelCredentials()), timeout) {}

Client::Client(std::shared_ptr<grpc::Channel> channel, std::chrono::milliseconds timeout)
    : channel_(std::move(channel)), stub_(pb::AntennaService::NewStub(channel_)), timeout_(timeout) {}

void Client::Prepare(grpc::ClientContext& context) const {
  context.set_deadline(std::chrono::system_clock::now() + timeout_);
}

bool Client::WaitReady(std::chrono::milliseconds wait) {
  return channel_->WaitForConnected(std::chrono::system_clock::now() + wait);
}

// One unary call: a fresh context with the deadline, the status turned into an exception.
#define ETCHGUARD_UNARY(method, request, reply) \
  do {                                          \
    grpc::ClientContext context;                \
    Prepare(context);                           \
    ThrowIfRefused(stub_->method(&context, (request), &(reply))); \
  } while (0)

pb::DeckInfo Client::LoadDeck(const std::string& toml) {
  pb::LoadDeckRequest request;
  request.set_toml(toml);
  pb::DeckInfo reply;
  ETCHGUARD_UNARY(LoadDeck, request, reply);
  deck_ = reply;
  return reply;
}

pb::DeckInfo Client::LoadDeckLef(const std::vector<std::pair<std::string, std::string>>& files,
                                 const std::string& process_name, std::int64_t dbu_per_micron) {
  pb::LoadDeckRequest request;
  pb::LefRules* lef = request.mutable_lef();
  for (const auto& [name, text] : files) {
    pb::LefText* file = lef->add_files();
    file->set_name(name);
    file->set_text(text);
  }
  lef->set_process_name(process_name);
  lef->set_dbu_per_micron(dbu_per_micron);
  pb::DeckInfo reply;
  ETCHGUARD_UNARY(LoadDeck, request, reply);
  deck_ = reply;
  return reply;
}

const pb::DeckInfo& Client::Deck() {
  if (!deck_) {
    pb::DeckInfo reply;
    ETCHGUARD_UNARY(GetDeck, pb::GetDeckRequest(), reply);
    deck_ = std::move(reply);
  }
  return *deck_;
}

std::vector<std::uint64_t> Client::OpenNet(const std::string& net, const std::vector<pb::Pin>& pins,
                                           const std::vector<pb::Shape>& shapes) {
  pb::ShapeIds reply;
  ETCHGUARD_UNARY(OpenNet, OpenNetRequest(net, pins, shapes), reply);
  return Ids(reply);
}

std::vector<std::uint64_t> Client::Commit(const std::string& net, const std::vector<pb::Shape>& shapes) {
  pb::ShapeIds reply;
  ETCHGUARD_UNARY(Commit, CommitRequest(net, shapes), reply);
  return Ids(reply);
}

pb::ShapeIds Client::CommitIfLegal(const std::string& net, const std::vector<pb::Shape>& shapes) {
  pb::ShapeIds reply;
  ETCHGUARD_UNARY(Commit, CommitRequest(net, shapes, true), reply);
  return reply;
}

std::uint32_t Client::Remove(const std::string& net, const std::vector<std::uint64_t>& shape_ids) {
  pb::RemoveReply reply;
  ETCHGUARD_UNARY(Remove, RemoveRequest(net, shape_ids), reply);
  return reply.removed();
}

void Client::CloseNet(const std::string& net) {
  pb::CloseNetRequest request;
  request.set_net(net);
  pb::CloseNetReply reply;
  ETCHGUARD_UNARY(CloseNet, request, reply);
}

std::uint64_t Client::DeclareBlockage(const pb::Shape& area, std::uint64_t blockage_id) {
  pb::DeclareBlockageRequest request;
  *request.mutable_area() = area;
  request.set_blockage_id(blockage_id);
  pb::BlockageId reply;
  ETCHGUARD_UNARY(DeclareBlockage, request, reply);
  return reply.id();
}

void Client::RemoveBlockage(std::uint64_t blockage_id) {
  pb::RemoveBlockageRequest request;
  request.set_id(blockage_id);
  pb::RemoveBlockageReply reply;
  ETCHGUARD_UNARY(RemoveBlockage, request, reply);
}

pb::ScoreReply Client::Score(const std::string& net, const std::vector<pb::Shape>& candidate,
                             bool without_changes) {
  return Score(ScoreRequest(net, candidate, without_changes));
}

pb::ScoreReply Client::Score(const pb::ScoreRequest& request) {
  pb::ScoreReply reply;
  ETCHGUARD_UNARY(Score, request, reply);
  return reply;
}

pb::ScoreBatchReply Client::ScoreBatch(const std::string& net, const CandidateBatch& batch, bool details) {
  return ScoreBatch(ScoreBatchRequest(net, batch, details));
}

pb::ScoreBatchReply Client::ScoreBatch(const pb::ScoreBatchRequest& request) {
  pb::ScoreBatchReply reply;
  ETCHGUARD_UNARY(ScoreBatch, request, reply);
  return reply;
}

pb::HeadroomReply Client::Headroom(const std::string& net, const std::string& layer, std::int64_t x,
                                   std::int64_t y) {
  pb::HeadroomRequest request;
  request.set_net(net);
  request.set_layer(layer);
  request.set_x(x);
  request.set_y(y);
  pb::HeadroomReply reply;
  ETCHGUARD_UNARY(Headroom, request, reply);
  return reply;
}

pb::NetReport Client::Check(const std::string& net) {
  pb::CheckNetRequest request;
  request.set_net(net);
  pb::NetReport reply;
  ETCHGUARD_UNARY(CheckNet, request, reply);
  return reply;
}

pb::Stats Client::Stats() {
  pb::Stats reply;
  ETCHGUARD_UNARY(GetStats, pb::GetStatsRequest(), reply);
  return reply;
}

#undef ETCHGUARD_UNARY

// -- Session ------------------------------------------------------------------------------

Session::Session(pb::AntennaService::Stub& stub)
    : context_(std::make_unique<grpc::ClientContext>()), stream_(stub.Session(context_.get())) {}

Session::~Session() {
  if (stream_ && !finished_) {
    // Dropping a session mid-way: cancel rather than wait for replies nobody reads.
    context_->TryCancel();
    stream_->Finish();
  }
}

Session::Session(Session&&) noexcept = default;
Session& Session::operator=(Session&&) noexcept = default;

std::uint64_t Session::Send(pb::SessionRequest request) {
  const std::uint64_t seq = next_seq_++;
  request.set_seq(seq);
  if (!stream_->Write(request)) {
    finished_ = true;
    ThrowIfRefused(stream_->Finish());
    throw ServiceError(grpc::StatusCode::UNAVAILABLE, "session stream closed by the server", "");
  }
  ++pending_;
  return seq;
}

pb::SessionReply Session::Receive() {
  pb::SessionReply reply;
  if (!stream_->Read(&reply)) {
    finished_ = true;
    ThrowIfRefused(stream_->Finish());
    throw ServiceError(grpc::StatusCode::UNAVAILABLE, "session stream ended before the reply", "");
  }
  --pending_;
  return reply;
}

pb::SessionReply Session::Ask(pb::SessionRequest request) {
  if (pending_ != 0) {
    throw std::logic_error(std::to_string(pending_) + " pipelined replies are not received yet");
  }
  const std::uint64_t seq = Send(std::move(request));
  pb::SessionReply reply = Receive();
  if (reply.seq() != seq) {
    throw std::runtime_error("session reply seq " + std::to_string(reply.seq()) + " for request " +
                             std::to_string(seq));
  }
  if (reply.has_error()) {
    throw ServiceError(static_cast<grpc::StatusCode>(reply.error().code()), reply.error().message(),
                       reply.error().field());
  }
  return reply;
}

std::vector<std::uint64_t> Session::OpenNet(const std::string& net, const std::vector<pb::Pin>& pins,
                                            const std::vector<pb::Shape>& shapes) {
  pb::SessionRequest request;
  *request.mutable_open_net() = OpenNetRequest(net, pins, shapes);
  return Ids(Ask(std::move(request)).open_net());
}

std::vector<std::uint64_t> Session::Commit(const std::string& net, const std::vector<pb::Shape>& shapes) {
  pb::SessionRequest request;
  *request.mutable_commit() = CommitRequest(net, shapes);
  return Ids(Ask(std::move(request)).commit());
}

pb::ShapeIds Session::CommitIfLegal(const std::string& net, const std::vector<pb::Shape>& shapes) {
  pb::SessionRequest request;
  *request.mutable_commit() = CommitRequest(net, shapes, true);
  return Ask(std::move(request)).commit();
}

std::uint32_t Session::Remove(const std::string& net, const std::vector<std::uint64_t>& shape_ids) {
  pb::SessionRequest request;
  *request.mutable_remove() = RemoveRequest(net, shape_ids);
  return Ask(std::move(request)).remove().removed();
}

pb::ScoreReply Session::Score(const std::string& net, const std::vector<pb::Shape>& candidate,
                              bool without_changes) {
  pb::SessionRequest request;
  *request.mutable_score() = ScoreRequest(net, candidate, without_changes);
  return std::move(*Ask(std::move(request)).mutable_score());
}

pb::ScoreBatchReply Session::ScoreBatch(const std::string& net, const CandidateBatch& batch, bool details) {
  pb::SessionRequest request;
  *request.mutable_score_batch() = ScoreBatchRequest(net, batch, details);
  return std::move(*Ask(std::move(request)).mutable_score_batch());
}

pb::NetReport Session::Check(const std::string& net) {
  pb::SessionRequest request;
  request.mutable_check()->set_net(net);
  return std::move(*Ask(std::move(request)).mutable_check());
}

void Session::CloseNet(const std::string& net) {
  pb::SessionRequest request;
  request.mutable_close_net()->set_net(net);
  Ask(std::move(request));
}

void Session::Finish() {
  if (finished_) return;
  finished_ = true;
  stream_->WritesDone();
  pb::SessionReply leftover;
  while (stream_->Read(&leftover)) {
  }
  ThrowIfRefused(stream_->Finish());
}

}  // namespace etchguard::client
