// C++ bench client: what etchguard costs a C++ router, against a bare echo floor.
//
//   etchguard_cpp_bench --ours ADDR --floor ADDR --requests FILE
//                       [--rounds N] [--calls N] [--batches N] [--warmup N] [--budget-s S]
//
// FILE holds length-delimited etchguard.v1.SessionRequest messages (protobuf's varint
// length prefix): the `score` ones are the single candidates, the `score_batch` one
// the batch. Both servers get the very same requests; the floor (bench/echo_server.py)
// answers with the reply bytes ours gave to them, so message sizes match both ways.
// Before each floor round the case is selected on the floor with /bench.Echo/Select,
// which also restarts its replies from the first.
//
// Cases: stream score (one Session stream per round, one request in flight, as a
// router thread asks), unary score (Score), and ScoreBatch of the first score_batch
// request (batch_mixed) and of the second (batch_rects), when the file has them. Rounds alternate floor
// and ours, order swapped every round, so drift of the shared machine hits both.
// Prints one line per case and server:
//   result CASE SERVER CALLS P50_US P99_US MEAN_US
// and `items_per_call CASE N` (candidates per call). Exit 0, or 1 on a failed call.
#include <algorithm>
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <fcntl.h>
#include <future>
#include <map>
#include <memory>
#include <stdexcept>
#include <string>
#include <unistd.h>
#include <vector>

#include <google/protobuf/io/zero_copy_stream_impl.h>
#include <google/protobuf/util/delimited_message_util.h>
#include <grpcpp/generic/generic_stub.h>
#include <grpcpp/grpcpp.h>

#include "etchguard/client.hpp"

namespace pb = etchguard::v1;
using Clock = std::chrono::steady_clock;

namespace {

struct Options {
  std::string ours, floor, requests;
  int rounds = 5, calls = 400, batches = 8, warmup = 50;
  double budget_s = 80.0;  // wall time for all rounds of all cases
};

Options ParseOptions(int argc, char** argv) {
  Options o;
  for (int i = 1; i < argc; ++i) {
    const std::string flag = argv[i];
    if (i + 1 >= argc) throw std::invalid_argument("missing value of " + flag);
    const std::string value = argv[++i];
    if (flag == "--ours") o.ours = value;
    else if (flag == "--floor") o.floor = value;
    else if (flag == "--requests") o.requests = value;
    else if (flag == "--rounds") o.rounds = std::stoi(value);
    else if (flag == "--calls") o.calls = std::stoi(value);
    else if (flag == "--batches") o.batches = std::stoi(value);
    else if (flag == "--warmup") o.warmup = std::stoi(value);
    else if (flag == "--budget-s") o.budget_s = std::stod(value);
    else throw std::invalid_argument("unknown option " + flag);
  }
  if (o.ours.empty() || o.floor.empty() || o.requests.empty()) {
    throw std::invalid_argument("--ours, --floor and --requests are required");
  }
  return o;
}

struct Requests {
  std::vector<pb::SessionRequest> stream_scores;  // op score, for the Session stream
  std::vector<pb::ScoreRequest> scores;           // the same candidates, for Score
  std::vector<pb::ScoreBatchRequest> batches;
};

Requests ReadRequests(const std::string& path) {
  const int fd = ::open(path.c_str(), O_RDONLY);
  if (fd < 0) throw std::runtime_error("cannot open " + path);
  google::protobuf::io::FileInputStream in(fd);
  in.SetCloseOnDelete(true);
  Requests r;
  bool clean_eof = false;
  while (true) {
    // A fresh message each time: the delimited parser merges into what it is given.
    pb::SessionRequest request;
    if (!google::protobuf::util::ParseDelimitedFromZeroCopyStream(&request, &in, &clean_eof)) break;
    if (request.has_score()) {
      r.scores.push_back(request.score());
      r.stream_scores.push_back(request);
    } else if (request.has_score_batch()) {
      r.batches.push_back(request.score_batch());
    }
  }
  if (!clean_eof) throw std::runtime_error(path + ": not a file of delimited SessionRequest messages");
  if (r.scores.empty() || r.batches.empty()) throw std::runtime_error(path + ": needs score and score_batch requests");
  return r;
}

void Ok(const grpc::Status& status, const char* what) {
  if (!status.ok()) {
    throw std::runtime_error(std::string(what) + " failed: " + std::to_string(status.error_code()) + " " +
                             status.error_message());
  }
}

std::chrono::system_clock::time_point Deadline() {
  return std::chrono::system_clock::now() + std::chrono::seconds(60);
}

// One server seen from this client: the generated stub and a generic one (Select).
struct Server {
  explicit Server(const std::string& address)
      : channel(grpc::CreateChannel(address, grpc::InsecureChannelCredentials())),
        stub(pb::AntennaService::NewStub(channel)),
        generic(channel) {
    if (!channel->WaitForConnected(std::chrono::system_clock::now() + std::chrono::seconds(10))) {
      throw std::runtime_error("no server at " + address);
    }
  }
  // The floor's control call: picks the case's canned replies, from the first.
  void Select(const std::string& name) {
    grpc::Slice slice(name);
    grpc::ByteBuffer request(&slice, 1), reply;
    grpc::ClientContext context;
    context.set_deadline(Deadline());
    std::promise<grpc::Status> done;
    generic.UnaryCall(&context, "/bench.Echo/Select", grpc::StubOptions(), &request, &reply,
                      [&done](grpc::Status s) { done.set_value(std::move(s)); });
    Ok(done.get_future().get(), "Select");
  }

  std::shared_ptr<grpc::Channel> channel;
  std::unique_ptr<pb::AntennaService::Stub> stub;
  grpc::GenericStub generic;
};

using Samples = std::vector<std::int64_t>;  // ns per call

// `warmup + calls` questions on one Session stream, one in flight at a time.
void StreamScores(Server& s, std::vector<pb::SessionRequest>& requests, int warmup, int calls, Samples& out) {
  grpc::ClientContext context;
  auto stream = s.stub->Session(&context);
  pb::SessionReply reply;
  const std::size_t n = requests.size();
  for (int i = 0; i < warmup + calls; ++i) {
    pb::SessionRequest& request = requests[static_cast<std::size_t>(i) % n];
    request.set_seq(static_cast<std::uint64_t>(i) + 1);
    const auto t = Clock::now();
    if (!stream->Write(request) || !stream->Read(&reply)) {
      Ok(stream->Finish(), "Session");
      throw std::runtime_error("Session stream ended early");
    }
    const auto dt = Clock::now() - t;
    if (reply.has_error()) throw std::runtime_error("Session score refused: " + reply.error().message());
    if (i >= warmup) out.push_back(std::chrono::duration_cast<std::chrono::nanoseconds>(dt).count());
  }
  stream->WritesDone();
  Ok(stream->Finish(), "Session");
}

template <typename Request, typename Reply, typename Call>
void Unary(const std::vector<Request>& requests, int warmup, int calls, Call call, Samples& out) {
  Reply reply;
  const std::size_t n = requests.size();
  for (int i = 0; i < warmup + calls; ++i) {
    grpc::ClientContext context;
    context.set_deadline(Deadline());
    const auto t = Clock::now();
    const grpc::Status status = call(&context, requests[static_cast<std::size_t>(i) % n], &reply);
    const auto dt = Clock::now() - t;
    Ok(status, "unary call");
    if (i >= warmup) out.push_back(std::chrono::duration_cast<std::chrono::nanoseconds>(dt).count());
  }
}

double Percentile(Samples s, double q) {
  std::sort(s.begin(), s.end());
  const std::size_t i = std::min(s.size() - 1, static_cast<std::size_t>(q * static_cast<double>(s.size())));
  return static_cast<double>(s[i]) / 1000.0;
}

double Mean(const Samples& s) {
  double total = 0;
  for (std::int64_t v : s) total += static_cast<double>(v);
  return total / static_cast<double>(s.size()) / 1000.0;
}

int Main(const Options& o) {
  Requests requests = ReadRequests(o.requests);
  Server ours(o.ours), floor(o.floor);
  const auto started = Clock::now();
  // The batch cases take the file's score_batch requests in order: the mixed batch
  // (one- and four-shape candidates), then the one with one rectangle per candidate.
  std::vector<std::string> cases = {"stream_score", "unary_score", "batch_mixed", "batch_rects"};
  cases.resize(2 + std::min<std::size_t>(2, requests.batches.size()));
  const double case_budget_s = o.budget_s / static_cast<double>(cases.size());
  for (const std::string& name : cases) {
    const bool is_batch = name.rfind("batch", 0) == 0;
    const std::vector<pb::ScoreBatchRequest> batch = {
        is_batch ? requests.batches[name == "batch_mixed" ? 0 : 1] : pb::ScoreBatchRequest()};
    std::map<std::string, Samples> samples;
    const auto case_start = Clock::now();
    for (int r = 0; r < o.rounds; ++r) {
      const bool floor_first = r % 2 == 0;
      for (int k = 0; k < 2; ++k) {
        const bool is_floor = (k == 0) == floor_first;
        Server& s = is_floor ? floor : ours;
        Samples& out = samples[is_floor ? "floor" : "ours"];
        if (is_floor) s.Select(name);
        if (name == "stream_score") {
          StreamScores(s, requests.stream_scores, o.warmup, o.calls, out);
        } else if (name == "unary_score") {
          Unary<pb::ScoreRequest, pb::ScoreReply>(
              requests.scores, o.warmup, o.calls,
              [&s](grpc::ClientContext* c, const pb::ScoreRequest& q, pb::ScoreReply* a) {
                return s.stub->Score(c, q, a);
              },
              out);
        } else {
          Unary<pb::ScoreBatchRequest, pb::ScoreBatchReply>(
              batch, 1, o.batches,
              [&s](grpc::ClientContext* c, const pb::ScoreBatchRequest& q, pb::ScoreBatchReply* a) {
                return s.stub->ScoreBatch(c, q, a);
              },
              out);
        }
      }
      const double spent = std::chrono::duration<double>(Clock::now() - case_start).count();
      if (spent > case_budget_s && r + 1 < o.rounds) {
        std::fprintf(stderr, "etchguard_cpp_bench: %s: time budget reached after %d rounds\n", name.c_str(), r + 1);
        break;
      }
    }
    for (const auto& [who, s] : samples) {
      std::printf("result %s %s %zu %.3f %.3f %.3f\n", name.c_str(), who.c_str(), s.size(), Percentile(s, 0.5),
                  Percentile(s, 0.99), Mean(s));
    }
    std::printf("items_per_call %s %d\n", name.c_str(),
                is_batch ? batch.front().candidates().shape_count_size() : 1);
    std::fflush(stdout);
  }
  std::printf("elapsed_s %.1f\n", std::chrono::duration<double>(Clock::now() - started).count());
  return 0;
}

}  // namespace

int main(int argc, char** argv) {
  try {
    return Main(ParseOptions(argc, argv));
  } catch (const std::invalid_argument& e) {
    std::fprintf(stderr, "etchguard_cpp_bench: %s\nusage: %s --ours ADDR --floor ADDR --requests FILE "
                 "[--rounds N] [--calls N] [--batches N] [--warmup N] [--budget-s S]\n", e.what(), argv[0]);
    return 2;
  } catch (const std::exception& e) {
    std::fprintf(stderr, "etchguard_cpp_bench: %s\n", e.what());
    return 1;
  }
}
