"""Blockages in a farm: ``ShardedClient.declare_blockage`` makes an area blocked for
advice on the nets of every shard under one id (shard 0 picks it, every other shard is
asked for it), and ``remove_blockage`` takes it back everywhere, from any farm client.

A real ``etchguard serve --shards 3 --state-dir DIR`` holds one net per shard, each the
hand-worked scenario of ``test_advice.py`` (an M1 run from a gate whose best hop is M3),
moved far apart in y so the nets never meet. One M3 blockage spans all of them: advice
on each net, legal before, must come back blocked by that blockage on every shard; a
shard killed and restarted from its journal must still hold it; removal makes every
net's option legal again. Shards whose own next ids differ (one was given a blockage
directly) still give a farm blockage one id, and a fresh farm client removes it. The
failure paths part way through a fan-out (a shard refusing or unreachable) are driven
with stand-in shard clients, as no real shard can be made to refuse on cue.
"""

from __future__ import annotations

import time

import grpc
import pytest
from etchguard import loads_deck
from etchguard._shards import Topology, shard_of
from etchguard.client import ServiceError, pb, pin, rect
from etchguard.sharded_client import ShardedClient
from shard_fixtures import start_farm
from test_advice import deck_text, far_side_net

SHARDS = 3
NET_PITCH_Y = 1_000_000  # DBU between the nets' copies of the scenario: far beyond any spacing
RUN = ("M1", 50, 50, 50050, 50)  # the gate's run in the scenario (test_grpc_blockage asks it too)


def _one_net_per_shard() -> list[str]:
    names: dict[int, str] = {}
    for i in range(1000):
        names.setdefault(shard_of(f"blk_fb/n{i}", SHARDS), f"blk_fb/n{i}")
        if len(names) == SHARDS:
            return [names[k] for k in range(SHARDS)]
    raise AssertionError("the names did not spread over the shards")


NETS = _one_net_per_shard()  # NETS[k] is held by shard k
# one M3 blockage across the hop of every net's copy (x as in test_grpc_blockage)
SPANNING_BLOCKAGE = rect("M3", 20000, 0, 21000, (SHARDS - 1) * NET_PITCH_Y + 100)


def _moved(r, dy: int) -> tuple[int, int, int, int]:
    return (r[0], r[1] + dy, r[2], r[3] + dy)


@pytest.fixture(scope="module")
def farm(tmp_path_factory):
    f = start_farm(SHARDS, "--state-dir", str(tmp_path_factory.mktemp("farm") / "state"), rules=None)
    try:
        deck = loads_deck(deck_text())
        names = [layer.name for layer in deck.layers]
        pins, shapes = far_side_net(deck)
        with f.client() as fc:
            fc.load_deck(deck_text())
            for k, net in enumerate(NETS):
                dy = k * NET_PITCH_Y
                fc.open_net(net, [pin(p.name, names[p.layer], [_moved(r, dy) for r in p.rects],
                                      dict(p.gate_area), p.diff_area) for p in pins],
                            [rect(names[s.layer], *_moved(s.rect, dy)) for s in shapes])
        yield f
    finally:
        assert f.stop() == 0


def _hop(fc: ShardedClient, k: int) -> pb.LayerOption:
    """The first option of advice for shard k's net (its M3 hop)."""
    x1, y1, x2, y2 = _moved((RUN[1], RUN[2], RUN[3], RUN[4]), k * NET_PITCH_Y)
    return fc.advise(NETS[k], RUN[0], x1, y1, x2, y2).options[0]


def _assert_every_hop_legal(fc: ShardedClient) -> None:
    for k in range(SHARDS):
        option = _hop(fc, k)
        assert option.layer == "M3" and option.status == pb.OPTION_STATUS_LEGAL, (k, option.conflicts)


def _wait_answering(fc: ShardedClient, k: int, timeout: float = 30.0) -> pb.LayerOption:
    """Shard k's hop once the restarted shard answers (a unary call is not retried)."""
    deadline = time.monotonic() + timeout
    while True:
        try:
            return _hop(fc, k)
        except ServiceError as exc:
            if exc.code is not grpc.StatusCode.UNAVAILABLE or time.monotonic() >= deadline:
                raise
            time.sleep(0.2)


def test_a_farm_blockage_blocks_advice_on_every_shard_survives_a_restart_and_is_removed(farm) -> None:
    with farm.client() as fc:
        _assert_every_hop_legal(fc)  # the test can fail: before the declaration nothing blocks
        bid = fc.declare_blockage(SPANNING_BLOCKAGE)
        for k in range(SHARDS):
            option = _hop(fc, k)
            assert option.status == pb.OPTION_STATUS_BLOCKED, f"shard {k} does not see the blockage"
            assert [(c.owner, c.blockage_id) for c in option.conflicts] == [(f"blockage {bid}", bid)], k

        victim = SHARDS - 1
        farm.wait_restarted(victim, farm.kill_shard(victim))
        assert _wait_answering(fc, victim).status == pb.OPTION_STATUS_BLOCKED  # replayed from its journal

        fc.remove_blockage(bid)
        _assert_every_hop_legal(fc)
        with pytest.raises(ServiceError) as again:
            fc.remove_blockage(bid)
        assert again.value.code is grpc.StatusCode.NOT_FOUND and again.value.field == "blockage_id"


@pytest.mark.parametrize("area, field", [
    (rect("M9", 0, 0, 10, 10), "area.layer"),
    (rect("M3", 10, 0, 0, 10), "area"),
])
def test_a_bad_area_is_refused_as_one_server_refuses_it_and_no_shard_holds_it(farm, area, field) -> None:
    with farm.client() as fc:
        with pytest.raises(ServiceError) as refused:
            fc.declare_blockage(area)
        assert refused.value.code is grpc.StatusCode.INVALID_ARGUMENT
        assert refused.value.field.startswith(field)
        for k in range(SHARDS):  # no shard holds a blockage: the ids any could have are all unknown
            with farm.shard_client(k) as shard:
                for shard_id in range(1, 10):
                    with pytest.raises(ServiceError) as unknown:
                        shard.remove_blockage(shard_id)
                    assert unknown.value.code is grpc.StatusCode.NOT_FOUND
        _assert_every_hop_legal(fc)


def test_removing_an_id_the_farm_never_gave_is_not_found(farm) -> None:
    with farm.client() as fc:
        with pytest.raises(ServiceError) as unknown:
            fc.remove_blockage(12345)
        assert unknown.value.code is grpc.StatusCode.NOT_FOUND and unknown.value.field == "blockage_id"


def test_shards_hold_a_farm_blockage_under_one_id_which_a_fresh_farm_client_removes(farm) -> None:
    away = rect("M3", 0, 5 * NET_PITCH_Y, 100, 5 * NET_PITCH_Y + 100)  # blocks no net
    with farm.shard_client(1) as shard:  # shard 1's own next id runs far ahead of shard 0's
        shard.declare_blockage(away, blockage_id=900)
    with farm.client() as declaring:
        _assert_every_hop_legal(declaring)
        bid = declaring.declare_blockage(SPANNING_BLOCKAGE)
    assert bid < 900
    with farm.client() as fresh:  # a router restarted: it knows the id, nothing else
        for k in range(SHARDS):
            assert [c.blockage_id for c in _hop(fresh, k).conflicts] == [bid], k
            with farm.shard_client(k) as shard, pytest.raises(ServiceError) as held:
                shard.declare_blockage(away, blockage_id=bid)  # every shard holds that very id
            assert held.value.code is grpc.StatusCode.ALREADY_EXISTS, k
        fresh.remove_blockage(bid)
        _assert_every_hop_legal(fresh)
        with pytest.raises(ServiceError) as gone:
            fresh.remove_blockage(bid)
        assert gone.value.code is grpc.StatusCode.NOT_FOUND
        fresh.remove_blockage(900)  # held by shard 1 alone: the others answer NOT_FOUND


# -- part way through the fan-out: stand-in shard clients ---------------------------------------

class StandInShard:
    """A shard client's blockage calls, as a server answers them: ids picked from 1 up,
    an asked id held (and the next pick moved past it), ALREADY_EXISTS when held; ``fail``
    is the status the next calls get (None: they succeed)."""

    def __init__(self) -> None:
        self.held: dict[int, pb.Shape] = {}
        self.next_id = 1
        self.fail: grpc.StatusCode | None = None

    def declare_blockage(self, area: pb.Shape, *, blockage_id: int = 0) -> int:
        self._maybe_fail()
        bid = blockage_id or self.next_id
        if bid in self.held:
            raise ServiceError(grpc.StatusCode.ALREADY_EXISTS, f"blockage {bid} is held already", "blockage_id")
        self.held[bid] = area
        self.next_id = max(self.next_id, bid + 1)
        return bid

    def remove_blockage(self, blockage_id: int) -> None:
        self._maybe_fail()
        if self.held.pop(blockage_id, None) is None:
            raise ServiceError(grpc.StatusCode.NOT_FOUND, f"no blockage {blockage_id}", "blockage_id")

    def _maybe_fail(self) -> None:
        if self.fail is not None:
            raise ServiceError(self.fail, "refused on cue", "area" if self.fail is grpc.StatusCode.INVALID_ARGUMENT
                               else "")

    def close(self) -> None:
        pass


def _stand_in_farm(shards: list[StandInShard]) -> ShardedClient:
    farm = ShardedClient(Topology(tuple(f"127.0.0.1:{9 + k}" for k in range(SHARDS))), connect=False)
    for client in farm.shards:
        client.close()
    farm.shards = shards  # type: ignore[assignment]
    return farm


@pytest.fixture
def stand_ins():
    shards = [StandInShard() for _ in range(SHARDS)]
    yield _stand_in_farm(shards), shards


AREA = rect("M3", 0, 0, 100, 100)


def _declare_then_lose(shard: StandInShard):
    """A declaration the shard takes, whose reply is lost; the shard stays away."""
    def declare(area: pb.Shape, *, blockage_id: int = 0) -> int:
        StandInShard.declare_blockage(shard, area, blockage_id=blockage_id)
        shard.fail = grpc.StatusCode.UNAVAILABLE
        raise ServiceError(grpc.StatusCode.UNAVAILABLE, "connection lost")
    return declare


def test_every_shard_gets_shard_0s_id_and_another_farm_client_removes_it(stand_ins) -> None:
    farm, shards = stand_ins
    shards[0].declare_blockage(AREA)  # shard 0 ahead of the others: it picks, they follow
    shards[0].declare_blockage(AREA)
    bid = farm.declare_blockage(AREA)
    assert bid == 3 and [list(s.held) for s in shards] == [[1, 2, 3], [3], [3]]
    assert farm.declare_blockage(AREA) == 4  # the others' own next ids never mattered
    _stand_in_farm(shards).remove_blockage(bid)
    assert [list(s.held) for s in shards] == [[1, 2, 4], [4], [4]]


def test_a_shard_refusing_part_way_leaves_no_shard_holding_it(stand_ins) -> None:
    farm, shards = stand_ins
    shards[2].fail = grpc.StatusCode.INVALID_ARGUMENT
    with pytest.raises(ServiceError) as refused:
        farm.declare_blockage(AREA)
    assert refused.value.code is grpc.StatusCode.INVALID_ARGUMENT and refused.value.field == "area"
    assert [s.held for s in shards] == [{}, {}, {}]


def test_a_shard_holding_the_id_refuses_it_keeps_its_own_and_a_new_call_gets_a_new_id(stand_ins) -> None:
    farm, shards = stand_ins
    shards[2].declare_blockage(AREA)  # declared on shard 2 directly: its id 1 is shard 0's next pick
    with pytest.raises(ServiceError) as taken:
        farm.declare_blockage(AREA)
    assert taken.value.code is grpc.StatusCode.ALREADY_EXISTS and taken.value.field == "blockage_id"
    assert [list(s.held) for s in shards] == [[], [], [1]]  # undone on 0 and 1; shard 2's own stays
    assert farm.declare_blockage(AREA) == 2
    assert [list(s.held) for s in shards] == [[2], [2], [1, 2]]


def test_an_unreachable_shard_is_named_and_remove_blockage_clears_it_later(stand_ins) -> None:
    farm, shards = stand_ins
    shards[1].declare_blockage = _declare_then_lose(shards[1])  # type: ignore[method-assign]
    with pytest.raises(ServiceError) as lost:
        farm.declare_blockage(AREA)
    assert lost.value.code is grpc.StatusCode.UNAVAILABLE and lost.value.field == "blockage_id"
    assert "shard 1 (reply lost)" in lost.value.message and "remove_blockage(1)" in lost.value.message
    assert [list(s.held) for s in shards] == [[], [1], []]  # undone on shard 0; shard 1 took it
    shards[1].fail = None  # back: any farm client clears it by the id
    _stand_in_farm(shards).remove_blockage(1)
    assert [s.held for s in shards] == [{}, {}, {}]


def test_an_undo_that_fails_names_the_shards_and_the_id_that_cleans_up(stand_ins) -> None:
    farm, shards = stand_ins
    shards[2].fail = grpc.StatusCode.FAILED_PRECONDITION

    def declare_then_go_away(area: pb.Shape, *, blockage_id: int = 0) -> int:  # answered, then away
        bid = StandInShard.declare_blockage(shards[1], area, blockage_id=blockage_id)
        shards[1].fail = grpc.StatusCode.UNAVAILABLE
        return bid
    shards[1].declare_blockage = declare_then_go_away  # type: ignore[method-assign]

    with pytest.raises(ServiceError) as failed:
        farm.declare_blockage(AREA)
    assert failed.value.code is grpc.StatusCode.FAILED_PRECONDITION and failed.value.field == "blockage_id"
    assert "held by shard 1;" in failed.value.message and "remove_blockage(1)" in failed.value.message
    assert [list(s.held) for s in shards] == [[], [1], []]

    shards[2].fail = None
    with pytest.raises(ServiceError) as still:  # shard 1 still away: named, for another try
        farm.remove_blockage(1)
    assert still.value.code is grpc.StatusCode.UNAVAILABLE and "shard(s) 1 (" in still.value.message
    shards[1].fail = None
    farm.remove_blockage(1)
    assert shards[1].held == {}
    with pytest.raises(ServiceError) as gone:
        farm.remove_blockage(1)
    assert gone.value.code is grpc.StatusCode.NOT_FOUND and gone.value.field == "blockage_id"
