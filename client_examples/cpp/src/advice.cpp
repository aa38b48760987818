// Advise, unary and as a session op (see etchguard/advice.hpp).
#include "etchguard/advice.hpp"

#include <stdexcept>
#include <string>
#include <utility>

namespace etchguard::client {

pb::AdviseRequest AdviseRequest(const std::string& net, const AdviceRun& run) {
  pb::AdviseRequest r;
  r.set_net(net);
  r.set_layer(run.layer);
  r.set_x1(run.x1);
  r.set_y1(run.y1);
  r.set_x2(run.x2);
  r.set_y2(run.y2);
  r.set_width(run.width);
  r.set_allow_non_preferred(run.allow_non_preferred);
  for (const std::string& answer : run.want) r.add_want(answer);
  return r;
}

pb::AdviseReply Advise(Client& client, const std::string& net, const AdviceRun& run) {
  return Advise(client, AdviseRequest(net, run));
}

pb::AdviseReply Advise(Client& client, const pb::AdviseRequest& request) {
  grpc::ClientContext context;
  client.Prepare(context);
  pb::AdviseReply reply;
  ThrowIfRefused(client.stub().Advise(&context, request, &reply));
  return reply;
}

pb::AdviseReply Advise(Session& session, const std::string& net, const AdviceRun& run) {
  pb::SessionRequest request;
  *request.mutable_advise() = AdviseRequest(net, run);
  pb::SessionReply reply = session.Ask(std::move(request));
  // A reply without the advise result would mean the server answered another op:
  // say so rather than hand back an empty advice that reads as "nothing found".
  if (reply.result_case() != pb::SessionReply::kAdvise) {
    throw std::runtime_error("session reply " + std::to_string(reply.seq()) + " carries no advise result");
  }
  return std::move(*reply.mutable_advise());
}

const pb::LayerOption* BestOption(const pb::AdviseReply& reply) {
  if (!reply.has_best_option()) return nullptr;
  const auto index = static_cast<int>(reply.best_option());
  return index < reply.options_size() ? &reply.options(index) : nullptr;
}

}  // namespace etchguard::client
