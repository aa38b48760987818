"""Names have a length limit in UTF-8 bytes, and refusals quote only a short prefix.

A status message travels in HTTP/2 trailers (non-ASCII bytes percent-encoded, three
characters each) and, for INVALID_ARGUMENT, again in the details: a refusal quoting
a long non-ASCII name could overflow the peer's 8 KiB metadata limit, and the code a
client saw then depended on how the transport gave up. So every refusal here must
come back with the same code every time, its message within the byte bound, quoting
at most a short prefix of the name cut on a character boundary.
"""

from __future__ import annotations

import grpc
import pytest

from etchguard import MAX_NAME_BYTES
from etchguard.client import ServiceError, pb, pin, rect
from etchguard.server.errors import MAX_MESSAGE_BYTES
from grpc_fixtures import DRIVER, GATE, net_name

# 3 bytes each in UTF-8 (9 once percent-encoded in a trailer), 4 bytes each
LONG_NAMES = ["路" * 3000, "\U0001d518" * 4000, "é" * 200_000]


def _refusal(call) -> ServiceError:
    with pytest.raises(ServiceError) as info:
        call()
    return info.value


def _bounded(error: ServiceError, name: str) -> None:
    assert len(error.message.encode()) <= MAX_MESSAGE_BYTES
    assert name[:200] not in error.message, "a long name is quoted only by a short prefix"


@pytest.mark.parametrize("name", LONG_NAMES, ids=["3-byte", "4-byte", "2-byte-400KB"])
def test_a_long_net_name_is_refused_the_same_way_every_time(client, name):
    calls = [
        lambda: client.check(name),
        lambda: client.commit(name, [rect("M1", 0, 0, 100, 100)]),
        lambda: client.score(name, [rect("M1", 0, 0, 100, 100)]),
        lambda: client.open_net(name, [GATE]),
    ]
    for call in calls:
        codes = set()
        for _ in range(5):
            error = _refusal(call)
            codes.add(error.code)
            _bounded(error, name)
            assert error.field == "net"
        assert codes == {grpc.StatusCode.INVALID_ARGUMENT}
    with client.session() as s:  # in a session too; the stream goes on
        error = _refusal(lambda: s.check(name))
        assert error.code == grpc.StatusCode.INVALID_ARGUMENT and error.field == "check.net"
        _bounded(error, name)
        assert _refusal(lambda: s.check("no-such-net")).code == grpc.StatusCode.NOT_FOUND


def test_names_up_to_the_limit_are_held_and_one_byte_more_is_refused(client):
    at_limit = "ж" * (MAX_NAME_BYTES // 2)  # 2 bytes each: exactly the limit
    assert len(at_limit.encode()) == MAX_NAME_BYTES
    client.open_net(at_limit, [GATE, DRIVER])
    assert client.check(at_limit).net == at_limit
    client.close_net(at_limit)
    error = _refusal(lambda: client.open_net(at_limit + "x", [GATE]))
    assert error.code == grpc.StatusCode.INVALID_ARGUMENT and error.field == "net"
    assert f"{MAX_NAME_BYTES + 1} bytes" in error.message
    long_pin = pin("p" * (MAX_NAME_BYTES + 1), "M1", [(0, 0, 200, 200)], gate_area={"thin": 0.05})
    error = _refusal(lambda: client.open_net(net_name(), [long_pin]))
    assert error.code == grpc.StatusCode.INVALID_ARGUMENT and error.field == "pins[0].name"


@pytest.mark.parametrize("name", LONG_NAMES[:2], ids=["3-byte", "4-byte"])
def test_long_layer_and_oxide_names_are_refused_with_a_bounded_message(client, name):
    net = net_name()
    client.open_net(net, [GATE, DRIVER])
    for _ in range(3):
        error = _refusal(lambda: client.commit(net, [rect(name, 0, 0, 100, 100)]))
        assert error.code == grpc.StatusCode.INVALID_ARGUMENT and error.field == "shapes[0].layer"
        _bounded(error, name)
    odd = pb.Pin(name="g", layer="M1", rects=[pb.Rect(xlo=0, ylo=0, xhi=9, yhi=9)], gate_area={name: 0.1})
    error = _refusal(lambda: client.open_net(net_name(), [odd]))
    assert error.code == grpc.StatusCode.INVALID_ARGUMENT
    _bounded(error, name)
    assert len(error.field.encode()) <= 300


def test_a_deck_with_a_layer_name_past_the_limit_is_refused_naming_the_entry(client):
    from grpc_fixtures import DEMO_DECK

    text = DEMO_DECK.read_text(encoding="utf-8").replace('name = "M1"', f'name = "{"M" * 300}"', 1)
    assert text != DEMO_DECK.read_text(encoding="utf-8")
    error = _refusal(lambda: client.load_deck(text))  # refused: the shared server's deck stays
    assert error.code == grpc.StatusCode.INVALID_ARGUMENT
    assert "layers[0].name" in error.field and "300 bytes" in error.message
    assert client.stats().deck == "lumen-6m"
