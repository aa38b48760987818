// A small C++17 client for the etchguard.v1 antenna service.
//
//   etchguard::client::Client eg("127.0.0.1:50051");
//   eg.OpenNet("blk_a/n1", {etchguard::client::GatePin("u1.a", "M1", {0, 0, 200, 200}, 0.05)});
//   auto ids = eg.Commit("blk_a/n1", {etchguard::client::RunShape("M1", 100, 100, 5000, 100)});
//   auto reply = eg.Score("blk_a/n1", {etchguard::client::RunShape("M2", 4900, 100, 4900, 9000)});
//
//   auto session = eg.OpenSession();        // one ordered stream per router thread
//   session.Commit(...); session.Score(...);
//
//   etchguard::client::CandidateBatch batch; // columnar candidates for ScoreBatch
//   batch.Add({...}); eg.ScoreBatch("blk_a/n1", batch);
//
// Replies are the generated protobuf messages (etchguard/v1/etchguard.pb.h). A refused
// call throws ServiceError carrying the status code, the message and the field the
// server names. Coordinates are int64 DBU; areas um^2.
#pragma once

#include <chrono>
#include <cstdint>
#include <map>
#include <memory>
#include <optional>
#include <stdexcept>
#include <string>
#include <utility>
#include <vector>

#include <grpcpp/grpcpp.h>

#include "etchguard/v1/etchguard.grpc.pb.h"

namespace etchguard::client {

namespace pb = ::etchguard::v1;

// A call the server refused. `field` is the proto field path the server named
// (from the BadRequest / ErrorInfo detail of a unary call, or SessionError.field).
class ServiceError : public std::runtime_error {
 public:
  ServiceError(grpc::StatusCode code, const std::string& message, std::string field);
  grpc::StatusCode code() const { return code_; }
  const std::string& field() const { return field_; }

 private:
  grpc::StatusCode code_;
  std::string field_;
};

// The field a rich error status names, read from its serialized google.rpc.Status
// details (BadRequest first, else ErrorInfo metadata "field"); empty when none.
std::string FieldOfStatusDetails(const std::string& serialized_status);

// Throws ServiceError (code, message, field) for a status that is not OK.
void ThrowIfRefused(const grpc::Status& status);

// -- building requests ----------------------------------------------------------------

struct Box {
  std::int64_t xlo, ylo, xhi, yhi;  // DBU, closed, xlo < xhi and ylo < yhi
};

pb::Rect ToRect(const Box& box);
// A rectangle shape on `layer`.
pb::Shape RectShape(const std::string& layer, const Box& box);
// A straight run along its centre line, expanded by the server: width 0 takes the
// layer's default wire width; no extension means width / 2 past each end.
pb::Shape RunShape(const std::string& layer, std::int64_t x1, std::int64_t y1, std::int64_t x2,
                   std::int64_t y2, std::int64_t width = 0,
                   std::optional<std::int64_t> extension = std::nullopt);
// The rectangle the server makes of a run (see RunShape) with an explicit width > 0:
// `extension` past each end (width / 2 when absent), width / 2 below or left of the
// centre line. Throws std::invalid_argument on a slanted line or a width <= 0.
Box RunBox(std::int64_t x1, std::int64_t y1, std::int64_t x2, std::int64_t y2, std::int64_t width,
           std::optional<std::int64_t> extension = std::nullopt);
// The deck's default via centred at (x, y): pad below, cut, pad above. Throws
// std::invalid_argument when `cut_layer` is not an inner cut layer with a cut size.
std::vector<pb::Shape> ViaShapes(const pb::DeckInfo& deck, const std::string& cut_layer,
                                 std::int64_t x, std::int64_t y);
// A gate input pin: gate area (um^2) of oxide class `oxide`, optional in-cell conductor.
pb::Pin GatePin(const std::string& name, const std::string& layer, const Box& box,
                double gate_area_um2, const std::string& oxide = "thin",
                const std::map<std::string, double>& cell_area_um2 = {});
// A driver output or diode pin: diffusion area (um^2).
pb::Pin DiffusionPin(const std::string& name, const std::string& layer, const Box& box,
                     double diff_area_um2);

// Candidates in columns for ScoreBatch: each Add() appends one candidate of one or
// more rectangle shapes; layer names are gathered into the table `layer` indexes.
// Shapes several candidates start with (a partial path) travel once as a shared part:
// AddCommon() adds one, Add(own, part) a candidate that starts with it.
class CandidateBatch {
 public:
  // Appends a candidate; returns its index in the batch. Throws std::invalid_argument
  // on an empty candidate or a shape that is not a rectangle.
  std::size_t Add(const std::vector<pb::Shape>& candidate);
  // Appends a one-rectangle candidate.
  std::size_t Add(const std::string& layer, const Box& box);
  // Adds a shared part (rectangle shapes, at least one); returns its index.
  std::size_t AddCommon(const std::vector<pb::Shape>& part);
  // Appends a candidate that is shared part `part` followed by `own` (at least one
  // shape); the answer equals that of the candidate sent whole. Throws
  // std::invalid_argument on an unknown part.
  std::size_t Add(const std::vector<pb::Shape>& own, std::size_t part);
  std::size_t size() const { return static_cast<std::size_t>(columns_.shape_count_size()); }
  const pb::CandidateColumns& columns() const { return columns_; }
  void Clear();

 private:
  std::uint32_t LayerIndex(const std::string& layer);
  // Records the shared part (index + 1, 0 = none) of the candidate just appended.
  void NotePart(std::uint32_t part_plus_one);
  pb::CandidateColumns columns_;
  std::map<std::string, std::uint32_t> layer_index_;
};

// -- the session stream ------------------------------------------------------------------

// One ordered bidirectional stream: every request is answered, in order, by one reply
// carrying its seq. The blocking methods send one request and wait for its reply;
// Send()/Receive() pipeline. Not thread-safe: one session per router thread.
class Session {
 public:
  Session(pb::AntennaService::Stub& stub);
  ~Session();
  Session(Session&&) noexcept;
  Session& operator=(Session&&) noexcept;
  Session(const Session&) = delete;
  Session& operator=(const Session&) = delete;

  // Queues one request with the next seq (which it returns) without waiting.
  std::uint64_t Send(pb::SessionRequest request);
  // The next reply in the order sent (error set when that request was refused).
  pb::SessionReply Receive();

  std::vector<std::uint64_t> OpenNet(const std::string& net, const std::vector<pb::Pin>& pins,
                                     const std::vector<pb::Shape>& shapes = {});
  std::vector<std::uint64_t> Commit(const std::string& net, const std::vector<pb::Shape>& shapes);
  // Scores the shapes and commits them only when legal, in one call: the reply's verdict
  // is the score; shape_ids is empty when nothing was committed.
  pb::ShapeIds CommitIfLegal(const std::string& net, const std::vector<pb::Shape>& shapes);
  std::uint32_t Remove(const std::string& net, const std::vector<std::uint64_t>& shape_ids);
  pb::ScoreReply Score(const std::string& net, const std::vector<pb::Shape>& candidate,
                       bool without_changes = false);
  pb::ScoreBatchReply ScoreBatch(const std::string& net, const CandidateBatch& batch,
                                 bool details = false);
  pb::NetReport Check(const std::string& net);
  void CloseNet(const std::string& net);

  // Half-closes the stream and waits for the server's status (throws if not OK).
  void Finish();

  // Sends one request built by the caller, waits for its reply, throws ServiceError
  // when refused. Public so ops with helpers in their own files (advice.hpp) use it.
  pb::SessionReply Ask(pb::SessionRequest request);

 private:
  std::unique_ptr<grpc::ClientContext> context_;
  std::unique_ptr<grpc::ClientReaderWriter<pb::SessionRequest, pb::SessionReply>> stream_;
  std::uint64_t next_seq_ = 1;
  std::size_t pending_ = 0;
  bool finished_ = false;
};

// -- the client ------------------------------------------------------------------------

class Client {
 public:
  // `target` is host:port or unix:/path; `timeout` bounds each unary call.
  explicit Client(const std::string& target,
                  std::chrono::milliseconds timeout = std::chrono::seconds(30));
  explicit Client(std::shared_ptr<grpc::Channel> channel,
                  std::chrono::milliseconds timeout = std::chrono::seconds(30));

  // True once the channel is connected, false when `wait` passes first.
  bool WaitReady(std::chrono::milliseconds wait);

  pb::DeckInfo LoadDeck(const std::string& toml);
  // The rules technology LEF states, mapped as `etchguard deck-from-lef` maps them:
  // (name, LEF text) pairs, the technology LEF first; the name is what errors and the
  // reply's warnings cite. `process_name` empty: the first name without its extension;
  // `dbu_per_micron` 0: the LEF's own.
  pb::DeckInfo LoadDeckLef(const std::vector<std::pair<std::string, std::string>>& files,
                           const std::string& process_name = "", std::int64_t dbu_per_micron = 0);
  // The server's deck (fetched once and kept).
  const pb::DeckInfo& Deck();

  std::vector<std::uint64_t> OpenNet(const std::string& net, const std::vector<pb::Pin>& pins,
                                     const std::vector<pb::Shape>& shapes = {});
  std::vector<std::uint64_t> Commit(const std::string& net, const std::vector<pb::Shape>& shapes);
  // Scores the shapes and commits them only when legal, in one call: the reply's verdict
  // is the score; shape_ids is empty when nothing was committed.
  pb::ShapeIds CommitIfLegal(const std::string& net, const std::vector<pb::Shape>& shapes);
  std::uint32_t Remove(const std::string& net, const std::vector<std::uint64_t>& shape_ids);
  void CloseNet(const std::string& net);
  // An area no new shape may use (advice counts an option through it as blocked); its id,
  // which is blockage_id when not 0 (ALREADY_EXISTS when the server holds it already).
  std::uint64_t DeclareBlockage(const pb::Shape& area, std::uint64_t blockage_id = 0);
  void RemoveBlockage(std::uint64_t blockage_id);

  pb::ScoreReply Score(const std::string& net, const std::vector<pb::Shape>& candidate,
                       bool without_changes = false);
  pb::ScoreBatchReply ScoreBatch(const std::string& net, const CandidateBatch& batch,
                                 bool details = false);
  // Sends a request built by the caller (reusing one message avoids rebuilding it).
  pb::ScoreReply Score(const pb::ScoreRequest& request);
  pb::ScoreBatchReply ScoreBatch(const pb::ScoreBatchRequest& request);
  pb::HeadroomReply Headroom(const std::string& net, const std::string& layer, std::int64_t x,
                             std::int64_t y);
  pb::NetReport Check(const std::string& net);
  pb::Stats Stats();

  Session OpenSession() { return Session(*stub_); }
  pb::AntennaService::Stub& stub() { return *stub_; }
  // The channel, for stubs of the other services (the shard face, sharded_client.hpp).
  std::shared_ptr<grpc::Channel> channel() const { return channel_; }

  // Sets this client's per-call deadline on a fresh context (for calls made on
  // stub() by helpers outside this class, e.g. advice.hpp).
  void Prepare(grpc::ClientContext& context) const;

 private:
  std::shared_ptr<grpc::Channel> channel_;
  std::unique_ptr<pb::AntennaService::Stub> stub_;
  std::chrono::milliseconds timeout_;
  std::optional<pb::DeckInfo> deck_;
};

}  // namespace etchguard::client
