"""Advise over gRPC (unary and in the session stream) against a real server on
loopback: the reply carries exactly the in-process engine's advice for the same net,
and refusals name the field. The advice itself is held to the independent reference
in tests/test_advice*.py; here the service must add and lose nothing."""

from __future__ import annotations

import grpc
import pytest

import etchguard as eg
from etchguard.client import ServiceError, pb, pin, rect
from etchguard.server import convert
from grpc_fixtures import DEMO_DECK, net_name

# A gate on M1 whose only metal so far is a short stub; the candidate is a long M1
# run from the gate side: 160 um x 0.14 um = 22.4 um^2 over a 0.05 um^2 gate is a
# partial ratio of about 450, over the demo deck's 400 (the deck's own values).
GATE = pin("u7.a", "M1", [(0, 0, 200, 200)], gate_area={"thin": 0.05})
STUB = rect("M1", 0, 30, 400, 170)
RUN = ("M1", 300, 100, 160_300, 100)


def _engine_advice():
    deck = eg.load_deck(DEMO_DECK)
    engine = eg.Engine(deck)
    engine.open_net("twin", convert.pins(deck, [GATE]), shapes=convert.shapes(deck, [STUB], "shapes"))
    layer, x1, y1, x2, y2 = RUN
    return deck, engine.advise("twin", deck.layer_index[layer], x1, y1, x2, y2)


def _open(client) -> str:
    name = net_name("adv")
    client.open_net(name, [GATE], shapes=[STUB])
    return name


def test_advise_reply_equals_the_engine(client):
    deck, expected = _engine_advice()
    assert not expected.legal_as_is  # the case is a real violation
    reply = client.advise(_open(client), *RUN)
    assert reply.legal_as_is == expected.legal_as_is and reply.found == expected.found
    assert reply.score.worst_utilization == expected.score.worst_utilization
    assert [o.layer for o in reply.options] == [o.layer for o in expected.options]
    assert [pb.OptionStatus.Name(o.status) for o in reply.options] == \
        [f"OPTION_STATUS_{o.status.name}" for o in expected.options]
    for got, want in zip(reply.options, expected.options):
        assert [(s.layer, (s.rect.xlo, s.rect.ylo, s.rect.xhi, s.rect.yhi)) for s in got.shapes] == \
            [(s.layer, s.rect) for s in want.shapes]
        assert got.score.worst_utilization == want.score.worst_utilization
    if expected.best is not None:
        assert reply.options[reply.best_option].layer == expected.best.layer
    else:
        assert not reply.HasField("best_option")
    assert (reply.jumper.kept_length_dbu if reply.jumper.HasField("kept_length_dbu") else None) == \
        expected.jumper.kept_length
    assert reply.diode.found == expected.diode.found
    if expected.diode.found:
        assert reply.diode.diff_area_um2 == expected.diode.diff_area_um2
    assert list(reply.explanation) == list(expected.explanation)


def test_advise_in_the_session_equals_unary(client):
    name = _open(client)
    unary = client.advise(name, *RUN, want=("hop",))
    with client.session() as session:
        streamed = session.advise(name, *RUN, want=("hop",))
    assert streamed == unary
    assert not unary.HasField("diode") and not unary.HasField("jumper")


@pytest.mark.parametrize(("kwargs", "field"), [
    ({"layer": "M9"}, "layer"),
    ({"layer": "V1"}, "layer"),
    ({"width": -5}, "width"),
    ({"want": ("teleport",)}, "want"),
])
def test_advise_refusals_name_the_field(client, kwargs, field):
    name = _open(client)
    before = client.check(name)
    layer = kwargs.pop("layer", RUN[0])
    with pytest.raises(ServiceError) as err:
        client.advise(name, layer, *RUN[1:], **kwargs)
    assert err.value.code == grpc.StatusCode.INVALID_ARGUMENT
    assert field in (err.value.field or "") or field in str(err.value)
    assert client.check(name) == before


def test_advise_unknown_net_is_not_found(client):
    with pytest.raises(ServiceError) as err:
        client.advise("no-such-net", *RUN)
    assert err.value.code == grpc.StatusCode.NOT_FOUND
