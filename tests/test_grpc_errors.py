"""Refusals: every bad input maps to its status code and names its proto field, as a
unary call and as a session request, and leaves the server's state as it was."""

from __future__ import annotations

import grpc
import pytest
from google.rpc import error_details_pb2
from grpc_status import rpc_status

from etchguard.client import ServiceError, pb, pin, rect, run
from grpc_fixtures import DEMO_DECK, GATE, candidate, net_name, open_small_net, start_server

INVALID = grpc.StatusCode.INVALID_ARGUMENT
NOT_FOUND = grpc.StatusCode.NOT_FOUND

M1 = rect("M1", 0, 30, 1000, 170)


def _cols(**overrides):
    cols = dict(layers=["M2"], shape_count=[1], layer=[0], xlo=[4830], ylo=[30], xhi=[4970], yhi=[9000])
    cols.update(overrides)
    return pb.CandidateColumns(**cols)


# (case id, session op, request built for the test's net, code, field path)
CASES = [
    ("inverted rect", "commit", lambda n: pb.CommitRequest(net=n, shapes=[M1, rect("M1", 10, 10, 5, 20)]),
     INVALID, "shapes[1].rect"),
    ("zero-width rect", "commit", lambda n: pb.CommitRequest(net=n, shapes=[rect("M1", 0, 0, 0, 10)]),
     INVALID, "shapes[0].rect"),
    ("coordinate past 2^62", "commit", lambda n: pb.CommitRequest(net=n, shapes=[rect("M1", 0, 0, 2**62, 9)]),
     INVALID, "shapes[0].rect"),
    ("unknown layer", "commit", lambda n: pb.CommitRequest(net=n, shapes=[M1, rect("M9", 0, 0, 9, 9)]),
     INVALID, "shapes[1].layer"),
    ("shape without geometry", "commit", lambda n: pb.CommitRequest(net=n, shapes=[pb.Shape(layer="M1")]),
     INVALID, "shapes[0].geometry"),
    ("negative width", "commit", lambda n: pb.CommitRequest(net=n, shapes=[run("M2", 0, 0, 0, 900, width=-140)]),
     INVALID, "shapes[0].run.width"),
    ("negative extension", "commit",
     lambda n: pb.CommitRequest(net=n, shapes=[run("M2", 0, 0, 0, 900, extension=-1)]),
     INVALID, "shapes[0].run.extension"),
    ("diagonal run", "commit", lambda n: pb.CommitRequest(net=n, shapes=[run("M2", 0, 0, 90, 900)]),
     INVALID, "shapes[0].run"),
    ("run on a cut layer", "commit", lambda n: pb.CommitRequest(net=n, shapes=[run("V1", 0, 0, 0, 900)]),
     INVALID, "shapes[0].layer"),
    ("commit to unknown net", "commit", lambda n: pb.CommitRequest(net="nope", shapes=[M1]),
     NOT_FOUND, "net"),
    ("NaN gate area", "open_net",
     lambda n: pb.OpenNetRequest(net=net_name(), pins=[pin("g", "M1", [(0, 0, 9, 9)], {"thin": float("nan")})]),
     INVALID, "pins[0].gate_area.thin"),
    ("infinite diffusion", "open_net",
     lambda n: pb.OpenNetRequest(net=net_name(), pins=[GATE, pin("d", "M1", [(0, 0, 9, 9)], diff_area=float("inf"))]),
     INVALID, "pins[1].diff_area"),
    ("negative cell area", "open_net",
     lambda n: pb.OpenNetRequest(net=net_name(), pins=[pin("g", "M1", [(0, 0, 9, 9)], 0.1, cell_area={"M1": -1.0})]),
     INVALID, "pins[0].cell_area.M1"),
    ("negative gate area", "open_net",
     lambda n: pb.OpenNetRequest(net=net_name(), pins=[pin("g", "M1", [(0, 0, 9, 9)], -0.1)]),
     INVALID, "pins[0].gate_area.thin"),
    ("pin on unknown layer", "open_net",
     lambda n: pb.OpenNetRequest(net=net_name(), pins=[pin("g", "Poly", [(0, 0, 9, 9)], 0.1)]),
     INVALID, "pins[0].layer"),
    ("pin without rects", "open_net",
     lambda n: pb.OpenNetRequest(net=net_name(), pins=[pin("g", "M1", [], 0.1)]),
     INVALID, "pins[0].rects"),
    ("pin named twice", "open_net",
     lambda n: pb.OpenNetRequest(net=net_name(), pins=[GATE, GATE]),
     INVALID, "pins[1].name"),
    ("net without a name", "open_net", lambda n: pb.OpenNetRequest(net="", pins=[GATE]),
     INVALID, "net"),
    ("upside-down layer range", "open_net",
     lambda n: pb.OpenNetRequest(net=net_name(), pins=[GATE],
                                 layer_range=pb.LayerRange(lowest="M4", highest="M2")),
     INVALID, "layer_range"),
    ("bad initial shape", "open_net",
     lambda n: pb.OpenNetRequest(net=net_name(), pins=[GATE], shapes=[rect("M1", 5, 0, 1, 9)]),
     INVALID, "shapes[0].rect"),
    ("net opened twice", "open_net", lambda n: pb.OpenNetRequest(net=n, pins=[GATE]),
     grpc.StatusCode.ALREADY_EXISTS, "net"),
    ("empty candidate", "score", lambda n: pb.ScoreRequest(net=n), INVALID, "candidate"),
    ("candidate on unknown layer", "score",
     lambda n: pb.ScoreRequest(net=n, candidate=[rect("MX", 0, 0, 9, 9)]), INVALID, "candidate[0].layer"),
    ("score unknown net", "score", lambda n: pb.ScoreRequest(net="nope", candidate=candidate()),
     NOT_FOUND, "net"),
    ("batch column too short", "score_batch",
     lambda n: pb.ScoreBatchRequest(net=n, candidates=_cols(xhi=[])), INVALID, "candidates.xhi"),
    ("batch counts off", "score_batch",
     lambda n: pb.ScoreBatchRequest(net=n, candidates=_cols(shape_count=[2])), INVALID,
     "candidates.shape_count"),
    ("batch empty candidate", "score_batch",
     lambda n: pb.ScoreBatchRequest(net=n, candidates=_cols(shape_count=[0, 1])), INVALID,
     "candidates.shape_count[0]"),
    ("batch layer index past the table", "score_batch",
     lambda n: pb.ScoreBatchRequest(net=n, candidates=_cols(layer=[3])), INVALID, "candidates.layer[0]"),
    ("batch unknown layer name", "score_batch",
     lambda n: pb.ScoreBatchRequest(net=n, candidates=_cols(layers=["M7"])), INVALID,
     "candidates.layers[0]"),
    ("batch inverted rect", "score_batch",
     lambda n: pb.ScoreBatchRequest(net=n, candidates=_cols(yhi=[10])), INVALID, "candidates[0].rect"),
    ("batch on unknown net", "score_batch", lambda n: pb.ScoreBatchRequest(net="nope", candidates=_cols()),
     NOT_FOUND, "net"),
    ("batch of pairs on unknown net", "score_batch",
     lambda n: pb.ScoreBatchRequest(net="nope", candidates=_cols(shape_count=[2], layer=[0, 0], xlo=[0, 0],
                                                                 ylo=[0, 0], xhi=[9, 9], yhi=[9, 9])),
     NOT_FOUND, "net"),
    ("remove unknown id", "remove", lambda n: pb.RemoveRequest(net=n, shape_ids=[1, 999]),
     NOT_FOUND, "shape_ids[1]"),
    ("remove an id twice", "remove", lambda n: pb.RemoveRequest(net=n, shape_ids=[2, 2]),
     NOT_FOUND, "shape_ids[1]"),
    ("remove from unknown net", "remove", lambda n: pb.RemoveRequest(net="nope", shape_ids=[1]),
     NOT_FOUND, "net"),
    ("headroom on unknown layer", "headroom", lambda n: pb.HeadroomRequest(net=n, layer="M0", x=1, y=1),
     INVALID, "layer"),
    ("check unknown net", "check", lambda n: pb.CheckNetRequest(net="nope"), NOT_FOUND, "net"),
    ("close unknown net", "close_net", lambda n: pb.CloseNetRequest(net="nope"), NOT_FOUND, "net"),
]

UNARY = {"commit": "Commit", "open_net": "OpenNet", "score": "Score", "score_batch": "ScoreBatch",
         "remove": "Remove", "headroom": "Headroom", "check": "CheckNet", "close_net": "CloseNet"}


@pytest.fixture(scope="module")
def net(server):
    with server.client() as c:
        name, _ids = open_small_net(c)
    return name


def _state(c, name):
    stats = c.stats()
    return c.check(name), stats.nets, stats.shapes


@pytest.mark.parametrize("case", CASES, ids=[c[0] for c in CASES])
def test_unary_refusal(client, net, case):
    _id, op, build, code, field = case
    before = _state(client, net)
    with pytest.raises(ServiceError) as err:
        client._call(getattr(client.stub, UNARY[op]), build(net))
    assert err.value.code == code
    assert err.value.field == field
    assert err.value.message.startswith(f"{field}: ")
    assert _state(client, net) == before


def test_session_refusals_keep_the_stream(client, net):
    before = _state(client, net)
    with client.session() as s:
        for _id, op, build, code, field in CASES:
            with pytest.raises(ServiceError) as err:
                s.ask(op, build(net))
            assert (err.value.code, err.value.field) == (code, f"{op}.{field}"), _id
            assert s.score(net, candidate()).changes  # the stream goes on
        seq = s.send("commit", pb.CommitRequest(net=net))  # an empty commit is fine
        reply = s.receive()
        assert reply.seq == seq and not reply.HasField("error")
        missing = s.send("score", pb.ScoreRequest(candidate=candidate()))  # no net named
        s.send_request(pb.SessionRequest(seq=77))  # no op at all
        first, second = s.receive(), s.receive()
        assert first.seq == missing and first.error.code == NOT_FOUND.value[0]
        assert second.seq == 77 and second.error.field == "op"
    assert _state(client, net) == before


def test_rich_details(client, net):
    try:
        client.stub.Commit(pb.CommitRequest(net=net, shapes=[rect("M9", 0, 0, 9, 9)]))
    except grpc.RpcError as exc:
        status = rpc_status.from_call(exc)
    else:
        pytest.fail("refused commit expected")
    kinds = {}
    for detail in status.details:
        for cls in (error_details_pb2.BadRequest, error_details_pb2.ErrorInfo):
            if detail.Is(cls.DESCRIPTOR):
                kinds[cls.__name__] = msg = cls()
                detail.Unpack(msg)
    assert kinds["BadRequest"].field_violations[0].field == "shapes[0].layer"
    assert "unknown layer 'M9'" in kinds["BadRequest"].field_violations[0].description
    assert kinds["ErrorInfo"].reason == "INVALID_ARGUMENT"
    assert kinds["ErrorInfo"].metadata["field"] == "shapes[0].layer"


def test_bad_deck_leaves_the_deck(client, net):
    before = client.stats().deck, _state(client, net)
    for toml, field in (("not toml [", "toml"), ("[process]\nname = 'x'\n", "toml: process.dbu_per_micron")):
        with pytest.raises(ServiceError) as err:
            client.load_deck(toml)
        assert err.value.code == INVALID and err.value.field == field
    lacking = DEMO_DECK.read_text().split("[[layers]]")[0] + "[[layers]]\nname = 'M1'\nkind = 'routing'\ndirection = 'horizontal'\n"
    with pytest.raises(ServiceError) as err:  # open nets use V1, M2: refused, nothing changes
        client.load_deck(lacking)
    assert err.value.code == INVALID and err.value.field == "deck.layers"
    assert (client.stats().deck, _state(client, net)) == before


# -- servers configured otherwise --------------------------------------------------------

@pytest.fixture(scope="module")
def no_deck():
    s = start_server(rules=None, metrics=False)
    yield s
    s.stop()


def test_no_deck_is_failed_precondition(no_deck):
    with no_deck.client() as c:
        for call in (lambda: c.deck, lambda: c.open_net("n", [GATE]), lambda: c.score("n", candidate()),
                     lambda: c.check("n"), lambda: list(c.check_all())):
            with pytest.raises(ServiceError) as err:
                call()
            assert err.value.code == grpc.StatusCode.FAILED_PRECONDITION and err.value.field == "deck"
        assert c.stats().deck == "" and c.health() == "SERVING"
        with c.session() as s:
            with pytest.raises(ServiceError) as err:
                s.commit("n", [M1])
            assert err.value.code == grpc.StatusCode.FAILED_PRECONDITION
        assert c.load_deck(DEMO_DECK).name == "lumen-6m"  # then it works
        name, _ = open_small_net(c)
        assert c.check(name).legal


@pytest.fixture(scope="module")
def limited():
    s = start_server("--max-nets", "2", "--max-shapes-per-net", "6", "--max-candidates", "4",
                     "--max-message-bytes", "20000", metrics=False)
    yield s
    s.stop()


def test_limits_are_resource_exhausted(limited):
    exhausted = grpc.StatusCode.RESOURCE_EXHAUSTED
    with limited.client() as c:
        name, ids = open_small_net(c)  # 4 shapes
        c.open_net("second", [GATE])
        before = _state(c, name)
        refusals = [
            (lambda: c.open_net("third", [GATE]), "net"),
            (lambda: c.commit(name, [M1, M1, M1]), "shapes"),
            (lambda: c.score_batch(name, [[4830, 30, 4970, 9000 + i] for i in range(5)], "M2"), "candidates"),
            (lambda: c.score(name, [M1] * 5), "candidate"),
        ]
        for call, field in refusals:
            with pytest.raises(ServiceError) as err:
                call()
            assert (err.value.code, err.value.field) == (exhausted, field)
        with pytest.raises(ServiceError) as err:  # past the message size: the transport refuses
            c.commit(name, [rect("M1", 0, 0, 10 + i, 10) for i in range(2000)])
        assert err.value.code == exhausted
        assert _state(c, name) == before
        assert len(c.score_batch(name, [[4830, 30, 4970, 9000 + i] for i in range(4)], "M2")) == 4
