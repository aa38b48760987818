"""Blockages over gRPC: DeclareBlockage and RemoveBlockage, the router's way to tell the
service of an area no new shape may use, as advice then sees it.

The net is the hand-worked scenario of ``test_advice.py`` (a gate far from its driver,
joined on M3; an M1 run from the gate whose best hop is M3); its deck is loaded with
LoadDeck. Over the wire the answers must be the engine's own: a blockage on the M3 track
makes that option blocked by "blockage <id>", removing it makes it legal again, and a
restart from the state folder keeps the blockage (it is journaled like a commit).

A caller may ask for the id (as a farm client does on every shard but shard 0): the
blockage is held under it, an id held already is refused ALREADY_EXISTS and changes
nothing, the ids the server picks afterwards go past it, and a restart (from the
snapshot written at shutdown, or from the journal alone after a kill) keeps all that.
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


def _blocking_ids(client) -> list[int]:
    """The ids of the blockages in the way of the M3 hop."""
    option = _first_option(client)
    assert option.layer == "M3"
    assert all(c.owner == f"blockage {c.blockage_id}" for c in option.conflicts)
    return sorted(c.blockage_id for c in option.conflicts)


ON_THE_HOP = rect("M3", 20000, 0, 21000, 100)
ALSO_ON_THE_HOP = rect("M3", 30000, 0, 31000, 100)
AWAY = rect("M3", 20000, 900000, 21000, 901000)  # far from the net: blocks nothing
ASKED = 40


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


def _assert_asked_id_refused(client, blockage_id: int, area: pb.Shape) -> None:
    with pytest.raises(ServiceError) as held:
        client.declare_blockage(area, blockage_id=blockage_id)
    assert held.value.code is grpc.StatusCode.ALREADY_EXISTS and held.value.field == "blockage_id"


@pytest.mark.parametrize("restart", ["snapshot", "journal"])
def test_an_asked_id_is_held_refused_twice_passed_by_picked_ids_and_kept_across_a_restart(tmp_path, restart) -> None:
    deck = loads_deck(deck_text())
    server = start_server("--state-dir", str(tmp_path / "state"), rules=None)
    try:
        with server.client() as client:
            _open(client, deck)
            assert client.declare_blockage(ON_THE_HOP, blockage_id=ASKED) == ASKED
            assert _blocking_ids(client) == [ASKED]
            _assert_asked_id_refused(client, ASKED, ALSO_ON_THE_HOP)
            assert _blocking_ids(client) == [ASKED]  # the refused area is not held
            assert client.declare_blockage(AWAY) == ASKED + 1  # picked past the asked id
            assert client.declare_blockage(ALSO_ON_THE_HOP, blockage_id=7) == 7  # below: asked, free
            assert _blocking_ids(client) == [7, ASKED]
    finally:
        if restart == "snapshot":
            assert server.stop() == 0  # a clean stop writes a snapshot
        else:
            server.proc.kill()  # no snapshot: the journal alone brings it back
            server.proc.wait()
    again = start_server("--state-dir", str(tmp_path / "state"), rules=None)
    try:
        with again.client() as client:
            assert _blocking_ids(client) == [7, ASKED]
            for held in (7, ASKED, ASKED + 1):
                _assert_asked_id_refused(client, held, AWAY)
            assert client.declare_blockage(AWAY) == ASKED + 2  # the next id survived the restart
            client.remove_blockage(ASKED)
            assert _blocking_ids(client) == [7]
    finally:
        again.stop()


@pytest.mark.parametrize("blockage_id", [1 << 63, (1 << 64) - 1])
def test_an_id_past_the_range_is_refused_naming_the_field(blockage_id) -> None:
    deck = loads_deck(deck_text())
    server = start_server(rules=None)
    try:
        with server.client() as client:
            _open(client, deck)
            with pytest.raises(ServiceError) as refused:
                client.declare_blockage(ON_THE_HOP, blockage_id=blockage_id)
            assert refused.value.code is grpc.StatusCode.INVALID_ARGUMENT and refused.value.field == "blockage_id"
            assert _first_option(client).status == pb.OPTION_STATUS_LEGAL
            assert client.declare_blockage(ON_THE_HOP) == 1  # the next picked id did not move
    finally:
        server.stop()
