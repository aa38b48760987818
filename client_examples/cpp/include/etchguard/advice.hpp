// Repair advice (Advise) for the etchguard.v1 C++ client: for a candidate run that
// would break a limit, the nearest legal layer hop with its via stacks, how much of
// the run may stay on its layer before hopping (jumper), and the smallest diode at
// the gate side. Advice changes nothing on the server.
//
//   etchguard::client::AdviceRun run;
//   run.layer = "M2"; run.x1 = 4900; run.y1 = 100; run.x2 = 4900; run.y2 = 60100;
//   run.width = 400;
//   pb::AdviseReply a = etchguard::client::Advise(client, "blk_a/n1", run);
//   if (const pb::LayerOption* hop = etchguard::client::BestOption(a)) { ... }
//
//   auto session = client.OpenSession();     // the same request as a session op
//   run.want = {"jumper", "diode"};           // only some answers: cheaper
//   pb::AdviseReply b = etchguard::client::Advise(session, "blk_a/n1", run);
//
// Kept apart from client.hpp so a router that never asks for advice need not read it.
#pragma once

#include <cstdint>
#include <string>
#include <vector>

#include "etchguard/client.hpp"

namespace etchguard::client {

// A candidate run given by its centre line on a routing layer (DBU), as the server
// expands runs (see RunShape). Horizontal or vertical; the server refuses others.
struct AdviceRun {
  std::string layer;                   // routing layer name
  std::int64_t x1 = 0, y1 = 0;         // DBU, first end point
  std::int64_t x2 = 0, y2 = 0;         // DBU, second end point
  std::int64_t width = 0;              // DBU; 0 = the layer's default wire width
  bool allow_non_preferred = false;    // also try layers routed the other way
  std::vector<std::string> want;       // any of "hop", "jumper", "diode"; empty = all
};

// The AdviseRequest for `run` on `net` (for callers that reuse or pipeline requests).
pb::AdviseRequest AdviseRequest(const std::string& net, const AdviceRun& run);

// Unary Advise with the client's deadline; throws ServiceError when refused.
pb::AdviseReply Advise(Client& client, const std::string& net, const AdviceRun& run);
pb::AdviseReply Advise(Client& client, const pb::AdviseRequest& request);

// The `advise` op of an ordered session (waits for its reply); throws ServiceError
// when refused, and the stream goes on.
pb::AdviseReply Advise(Session& session, const std::string& net, const AdviceRun& run);

// The first free and legal layer hop (the reply's best_option), or nullptr when
// there is none or hops were not asked for.
const pb::LayerOption* BestOption(const pb::AdviseReply& reply);

}  // namespace etchguard::client
