"""Blockages over gRPC: DeclareBlockage and RemoveBlockage, the router's way to tell the
service of an area no new shape may use, as advice then sees it.

The net is the hand-worked scenario of ``test_advice.py`` (a gate far from its driver,
joined on M3; an M1 run from the gate whose best hop is M3); its deck is loaded with
LoadDeck. Over the wire the answers must be the engine's own: a blockage on the M3 track
makes that option blocked by "blockage <id>", removing it makes it legal again, and a
restart from the state folder keeps the blockage (it is journaled like a commit).
"""

from __future__ import annotations

import grpc
import pytest
from etchguard import loads_deck
from etchguard.client import ServiceError, pb, pin, rect
from grpc_fixtures import start_server
from test_advice import deck_text, far_side_net

RUN = ("M1", 50, 50, 50050, 50)  # the gate's run, as test_advice asks it


def _open(client, deck) -> None:
    client.load_deck(deck_text())
    pins, shapes = far_side_net(deck)
    names = [layer.name for layer in deck.layers]
    client.open_net("n", [pin(p.name, names[p.layer], p.rects, dict(p.gate_area), p.diff_area) for p in pins],
                    [rect(names[s.layer], *s.rect) for s in shapes])


def _first_option(client) -> pb.LayerOption:
    return client.advise("n", *RUN).options[0]


def test_declared_blockage_blocks_the_hop_until_removed(tmp_path) -> None:
    deck = loads_deck(deck_text())
    server = start_server("--state-dir", str(tmp_path / "state"), rules=None)
    try:
        with server.client() as client:
            _open(client, deck)
            assert _first_option(client).status == pb.OPTION_STATUS_LEGAL
            bid = client.declare_blockage(rect("M3", 20000, 0, 21000, 100))
            option = _first_option(client)
            assert option.layer == "M3" and option.status == pb.OPTION_STATUS_BLOCKED
            assert option.conflicts[0].owner == f"blockage {bid}" and option.conflicts[0].blockage_id == bid
    finally:
        assert server.stop() == 0
    again = start_server("--state-dir", str(tmp_path / "state"), rules=None)
    try:
        with again.client() as client:  # the journal replays the blockage
            assert _first_option(client).status == pb.OPTION_STATUS_BLOCKED
            client.remove_blockage(bid)
            assert _first_option(client).status == pb.OPTION_STATUS_LEGAL
            with pytest.raises(ServiceError) as unknown:
                client.remove_blockage(bid)
            assert unknown.value.code == grpc.StatusCode.NOT_FOUND
    finally:
        again.stop()


@pytest.mark.parametrize("area, field", [
    (rect("M9", 0, 0, 10, 10), "area.layer"),
    (rect("M3", 10, 0, 0, 10), "area"),
    (None, "area"),
])
def test_a_bad_blockage_is_refused_and_changes_nothing(area, field) -> None:
    deck = loads_deck(deck_text())
    server = start_server(rules=None)
    try:
        with server.client() as client:
            _open(client, deck)
            if area is None:  # no area at all: past the client, which always sends one
                with pytest.raises(grpc.RpcError) as raw:
                    client.stub.DeclareBlockage(pb.DeclareBlockageRequest())
                assert raw.value.code() == grpc.StatusCode.INVALID_ARGUMENT
                assert raw.value.details().startswith(f"{field}:")
            else:
                with pytest.raises(ServiceError) as refused:
                    client.declare_blockage(area)
                assert refused.value.code == grpc.StatusCode.INVALID_ARGUMENT
                assert refused.value.field.startswith(field)
            assert _first_option(client).status == pb.OPTION_STATUS_LEGAL
    finally:
        server.stop()
