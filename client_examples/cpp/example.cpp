// etchguard C++ example: what a router thread does with the service.
//
//   etchguard_example ADDRESS [NET]
//
// Opens one net (a gate on M1 routed to a via up to M2, with its driver not yet
// joined), streams commits and scores over one Session, scores the same candidate
// by a unary call, scores a columnar batch (and one with a shared part), asks for repair advice on a run that
// breaks a limit (in the session and by a unary call), shows a refusal naming its
// field, and closes the net. It prints every figure as one `key value` line (doubles with 17
// significant digits, so they read back exactly), for people and scripts alike.
// Exit status: 0 done, 1 a call failed, 2 bad arguments.
#include <cstdio>
#include <exception>
#include <string>
#include <vector>

#include "etchguard/advice.hpp"
#include "etchguard/client.hpp"

namespace eg = etchguard::client;
namespace pb = etchguard::v1;

namespace {

constexpr std::uint64_t kBlockageId = 4242;  // the blockage id the example asks for

void Print(const std::string& key, double value) { std::printf("%s %.17g\n", key.c_str(), value); }
void Print(const std::string& key, bool value) { std::printf("%s %s\n", key.c_str(), value ? "true" : "false"); }
void Print(const std::string& key, const std::string& value) {
  std::printf("%s %s\n", key.c_str(), value.c_str());
}
void PrintCount(const std::string& key, std::uint64_t value) {
  std::printf("%s %llu\n", key.c_str(), static_cast<unsigned long long>(value));
}
void PrintInt(const std::string& key, std::int64_t value) {
  std::printf("%s %lld\n", key.c_str(), static_cast<long long>(value));
}
void PrintIds(const std::string& key, const std::vector<std::uint64_t>& ids) {
  std::printf("%s", key.c_str());
  for (std::uint64_t id : ids) std::printf(" %llu", static_cast<unsigned long long>(id));
  std::printf("\n");
}

// The figures of one what-if answer under `prefix`.
void PrintScore(const std::string& prefix, const pb::ScoreReply& s) {
  Print(prefix + ".worst_utilization", s.worst_utilization());
  Print(prefix + ".worst_change_utilization", s.worst_change_utilization());
  Print(prefix + ".legal", s.legal());
  Print(prefix + ".breaks_limit", s.breaks_limit());
  Print(prefix + ".cost", s.cost());
  for (const pb::LayerArea& a : s.added_area()) Print(prefix + ".added_area." + a.layer(), a.area_um2());
  PrintCount(prefix + ".changes", static_cast<std::uint64_t>(s.changes_size()));
}

// The advice figures under `prefix`: the verdict, the layer hops in the server's
// order, the jumper and the diode (each only when asked for), the cost in exact
// scores, the first sentence of the explanation and of the warnings. An absent optional
// is "none".
void PrintAdvice(const std::string& prefix, const pb::AdviseReply& a) {
  Print(prefix + ".legal_as_is", a.legal_as_is());
  Print(prefix + ".found", a.found());
  PrintInt(prefix + ".width", a.width());
  Print(prefix + ".score.worst_utilization", a.score().worst_utilization());
  PrintCount(prefix + ".options", static_cast<std::uint64_t>(a.options_size()));
  for (int i = 0; i < a.options_size(); ++i) {
    const pb::LayerOption& o = a.options(i);
    const std::string p = prefix + ".option." + std::to_string(i);
    Print(p + ".layer", o.layer());
    Print(p + ".status", pb::OptionStatus_Name(o.status()));
    PrintCount(p + ".cuts", o.cuts());
    Print(p + ".worst_utilization", o.score().worst_utilization());
  }
  const pb::LayerOption* best = eg::BestOption(a);
  Print(prefix + ".best_option.layer", best != nullptr ? best->layer() : std::string("none"));
  Print(prefix + ".jumper.present", a.has_jumper());
  if (a.has_jumper()) {
    const pb::JumperAdvice& j = a.jumper();
    Print(prefix + ".jumper.applicable", j.applicable());
    if (j.has_kept_length_dbu()) {
      PrintInt(prefix + ".jumper.kept_length_dbu", j.kept_length_dbu());
    } else {
      Print(prefix + ".jumper.kept_length_dbu", std::string("none"));
    }
    Print(prefix + ".jumper.hop_layer", j.hop_layer());
    if (j.has_hop_point()) {
      Print(prefix + ".jumper.hop_point", std::to_string(j.hop_point().x()) + " " + std::to_string(j.hop_point().y()));
    } else {
      Print(prefix + ".jumper.hop_point", std::string("none"));
    }
    Print(prefix + ".jumper.limited_by", pb::LimitedBy_Name(j.limited_by()));
    Print(prefix + ".jumper.legal", j.legal());
  }
  Print(prefix + ".diode.present", a.has_diode());
  if (a.has_diode()) {
    const pb::DiodeAdvice& d = a.diode();
    Print(prefix + ".diode.found", d.found());
    Print(prefix + ".diode.gate", d.gate());
    if (d.has_diff_area_um2()) {
      Print(prefix + ".diode.diff_area_um2", d.diff_area_um2());
    } else {
      Print(prefix + ".diode.diff_area_um2", std::string("none"));
    }
  }
  PrintCount(prefix + ".exact_scores", a.exact_scores());
  PrintCount(prefix + ".explanations", static_cast<std::uint64_t>(a.explanation_size()));
  Print(prefix + ".explanation.0", a.explanation_size() > 0 ? a.explanation(0) : std::string("none"));
  PrintCount(prefix + ".warnings", static_cast<std::uint64_t>(a.warnings_size()));
  Print(prefix + ".warning.0", a.warnings_size() > 0 ? a.warnings(0) : std::string("none"));
}

// The demo net: gate u1.a on M1 at the origin, driver u0.y 20 um away on M1, not yet
// joined (so the gate side sees no diffusion while M1 and M2 are etched).
std::vector<pb::Pin> DemoPins() {
  return {eg::GatePin("u1.a", "M1", {0, 0, 200, 200}, 0.05, "thin", {{"M1", 0.02}}),
          eg::DiffusionPin("u0.y", "M1", {20000, 0, 20200, 200}, 0.3)};
}

// M1 from the gate out to x = 5 um, and the deck's V1 via there up to M2.
std::vector<pb::Shape> Trunk(const pb::DeckInfo& deck) {
  std::vector<pb::Shape> shapes = {eg::RectShape("M1", {0, 30, 5000, 170})};
  for (pb::Shape& s : eg::ViaShapes(deck, "V1", 4900, 100)) shapes.push_back(std::move(s));
  return shapes;
}

// A vertical M2 run up from the via, `length` DBU long, the deck's default width.
std::vector<pb::Shape> Riser(std::int64_t length) {
  return {eg::RunShape("M2", 4900, 100, 4900, 100 + length)};
}

// The run to advise on: a wide (400 DBU) M2 riser 60 um up from the via. At that
// width the partial area ratio on M2 binds before the side wall does, so both a
// jumper (hop part of it up) and a diode at the gate can repair it.
eg::AdviceRun WideRiser() {
  eg::AdviceRun run;
  run.layer = "M2";
  run.x1 = 4900;
  run.y1 = 100;
  run.x2 = 4900;
  run.y2 = 60100;
  run.width = 400;
  return run;
}

// The batch: M2 risers of growing length (140 DBU wide, as rectangles), then one
// two-shape candidate, a short M2 riser with an M1 stub beside the via.
eg::CandidateBatch DemoBatch() {
  eg::CandidateBatch batch;
  for (std::int64_t length : {2000, 20000, 60000, 140000, 300000}) {
    batch.Add("M2", eg::RunBox(4900, 100, 4900, 100 + length, 140));
  }
  batch.Add({eg::RectShape("M2", eg::RunBox(4900, 100, 4900, 8100, 140)),
             eg::RectShape("M1", eg::RunBox(5000, 100, 9000, 100, 140))});
  return batch;
}

// A batch with a shared part: the M2 riser to 8100 sent once; an M1 stub and a riser
// extension start with it, a short riser does not. The answers equal those of the
// candidates sent whole (the test holds them to the Python client's).
eg::CandidateBatch SharedBatch() {
  eg::CandidateBatch batch;
  const std::size_t riser = batch.AddCommon({eg::RectShape("M2", eg::RunBox(4900, 100, 4900, 8100, 140))});
  batch.Add({eg::RectShape("M1", eg::RunBox(5000, 100, 9000, 100, 140))}, riser);
  batch.Add({eg::RectShape("M2", eg::RunBox(4900, 8100, 4900, 20100, 140))}, riser);
  batch.Add("M2", eg::RunBox(4900, 100, 4900, 2100, 140));
  return batch;
}

void PrintBatch(const std::string& prefix, const eg::CandidateBatch& batch, const pb::ScoreBatchReply& scores) {
  PrintCount(prefix + ".size", batch.size());
  for (int i = 0; i < scores.cost_size(); ++i) {
    const std::string at = prefix + "." + std::to_string(i);
    Print(at + ".worst_utilization", scores.worst_utilization(i));
    Print(at + ".worst_change_utilization", scores.worst_change_utilization(i));
    Print(at + ".legal", static_cast<bool>(scores.legal(i)));
    Print(at + ".breaks_limit", static_cast<bool>(scores.breaks_limit(i)));
    Print(at + ".cost", scores.cost(i));
    Print(at + ".added_area_um2", scores.added_area_um2(i));
  }
}

int Run(const std::string& address, const std::string& net) {
  eg::Client client(address);
  if (!client.WaitReady(std::chrono::seconds(10))) {
    std::fprintf(stderr, "etchguard_example: no server at %s\n", address.c_str());
    return 1;
  }
  const pb::DeckInfo& deck = client.Deck();
  Print("deck.name", deck.name());
  PrintCount("deck.layers", static_cast<std::uint64_t>(deck.layers_size()));

  PrintIds("open_net.ids", client.OpenNet(net, DemoPins()));

  {
    eg::Session session = client.OpenSession();
    PrintIds("stream.commit.ids", session.Commit(net, Trunk(deck)));
    PrintScore("stream.score.short", session.Score(net, Riser(9000)));
    PrintScore("stream.score.long", session.Score(net, Riser(200000)));
    // Scored and committed in one call, only when legal: the long riser is not.
    const pb::ShapeIds refused = session.CommitIfLegal(net, Riser(200000));
    PrintScore("stream.commit_if_legal.long", refused.verdict());
    PrintCount("stream.commit_if_legal.long.committed", static_cast<std::uint64_t>(refused.shape_ids_size()));
    const std::vector<std::uint64_t> riser_ids = session.Commit(net, Riser(9000));
    PrintIds("stream.commit_riser.ids", riser_ids);
    const pb::NetReport report = session.Check(net);
    Print("stream.check.worst_utilization", report.worst_utilization());
    Print("stream.check.legal", report.legal());
    PrintCount("stream.remove.removed", session.Remove(net, riser_ids));
    // Only the jumper and the diode: the server skips scoring hops nobody asked for.
    eg::AdviceRun run = WideRiser();
    run.want = {"jumper", "diode"};
    PrintAdvice("stream.advise", eg::Advise(session, net, run));
    session.Finish();
  }

  PrintScore("unary.score.long", client.Score(net, Riser(200000)));
  PrintAdvice("unary.advise", eg::Advise(client, net, WideRiser()));

  const eg::CandidateBatch batch = DemoBatch();
  PrintBatch("batch", batch, client.ScoreBatch(net, batch));
  const eg::CandidateBatch shared = SharedBatch();
  PrintBatch("shared", shared, client.ScoreBatch(net, shared));

  // A refusal: a layer the deck does not have. The call changes nothing.
  try {
    client.Score(net, {eg::RunShape("M9", 0, 0, 1000, 0)});
    Print("refusal.code", std::string("none"));
  } catch (const eg::ServiceError& e) {
    PrintCount("refusal.code", static_cast<std::uint64_t>(e.code()));
    Print("refusal.field", e.field());
  }

  // A blockage under an id of our choosing (a farm client gives every shard shard 0's
  // id so), far from the net; asking for an id held already is refused.
  const pb::Shape keep_out = eg::RectShape("M3", {0, 5000000, 1000, 5001000});
  PrintCount("blockage.id", client.DeclareBlockage(keep_out, kBlockageId));
  try {
    client.DeclareBlockage(keep_out, kBlockageId);
    Print("blockage.again.code", std::string("none"));
  } catch (const eg::ServiceError& e) {
    PrintCount("blockage.again.code", static_cast<std::uint64_t>(e.code()));
    Print("blockage.again.field", e.field());
  }
  client.RemoveBlockage(kBlockageId);

  client.CloseNet(net);
  Print("closed", net);
  return 0;
}

}  // namespace

int main(int argc, char** argv) {
  if (argc < 2 || argc > 3) {
    std::fprintf(stderr, "usage: %s ADDRESS [NET]   (ADDRESS host:port or unix:/path)\n", argv[0]);
    return 2;
  }
  try {
    return Run(argv[1], argc == 3 ? argv[2] : "blk_a/n1");
  } catch (const eg::ServiceError& e) {
    std::fprintf(stderr, "etchguard_example: refused (%d) %s [field %s]\n", static_cast<int>(e.code()),
                 e.what(), e.field().c_str());
  } catch (const std::exception& e) {
    std::fprintf(stderr, "etchguard_example: %s\n", e.what());
  }
  return 1;
}
