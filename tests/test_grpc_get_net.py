"""GetNet hands out what a net is made of, ids included, as the server holds it after
commits and rip-ups; GetDeck hands out the deck's TOML, which loads to the same deck."""

from __future__ import annotations

import grpc
import pytest

import etchguard as eg
from etchguard.client import ServiceError, rect
from grpc_fixtures import DEMO_DECK, DRIVER, GATE, net_name, trunk


def test_get_net_returns_pins_and_held_shapes_with_ids(client):
    name = net_name("get")
    client.open_net(name, [GATE, DRIVER], layer_range=("M1", "M4"))
    ids = client.commit(name, trunk(client.deck))
    client.remove(name, [ids[1]])
    extra = client.commit(name, [rect("M2", 4800, 0, 5000, 3000)])
    content = client.get_net(name)
    assert content.net == name
    assert [p.name for p in content.pins] == ["u1.a", "u0.y"]
    assert dict(content.pins[0].gate_area) == {"thin": 0.05} and content.pins[1].diff_area == 0.3
    assert [h.id for h in content.shapes] == [ids[0]] + ids[2:] + extra
    assert (content.layer_range.lowest, content.layer_range.highest) == ("M1", "M4")
    last = content.shapes[-1].shape
    assert last.layer == "M2" and (last.rect.xlo, last.rect.yhi) == (4800, 3000)


def test_get_deck_text_loads_to_the_same_deck(client):
    text = client.deck.toml
    assert text == DEMO_DECK.read_text(encoding="utf-8")
    assert eg.loads_deck(text, str(DEMO_DECK)) == eg.load_deck(DEMO_DECK)


def test_get_net_of_an_unknown_net_is_not_found(client):
    with pytest.raises(ServiceError) as err:
        client.get_net("no-such-net")
    assert err.value.code == grpc.StatusCode.NOT_FOUND
