"""Blockages in a farm: ``ShardedClient.declare_blockage`` makes an area blocked for
advice on the nets of every shard, and ``remove_blockage`` takes it back everywhere.

A real ``etchguard serve --shards 3 --state-dir DIR`` holds one net per shard, each the
hand-worked scenario of ``test_advice.py`` (an M1 run from a gate whose best hop is M3),
moved far apart in y so the nets never meet. One M3 blockage spans all of them: advice
on each net, legal before, must come back blocked by that blockage on every shard; a
shard killed and restarted from its journal must still hold it; removal makes every
net's option legal again. The failure paths part way through a fan-out (a shard
refusing or unreachable) are driven with stand-in shard clients, as no real shard can
be made to refuse on cue.
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
            # ids stay in step on every shard while one farm client declares them all
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


# -- part way through the fan-out: stand-in shard clients ---------------------------------------

class StandInShard:
    """A shard client's blockage calls: ids from 1 up; ``fail`` is the status the next
    calls get (None: they succeed)."""

    def __init__(self) -> None:
        self.held: dict[int, pb.Shape] = {}
        self.next_id = 1
        self.fail: grpc.StatusCode | None = None

    def declare_blockage(self, area: pb.Shape) -> int:
        self._maybe_fail()
        self.held[self.next_id] = area
        self.next_id += 1
        return self.next_id - 1

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


@pytest.fixture
def stand_ins():
    farm = ShardedClient(Topology(tuple(f"127.0.0.1:{9 + k}" for k in range(SHARDS))), connect=False)
    for client in farm.shards:
        client.close()
    shards = [StandInShard() for _ in range(SHARDS)]
    farm.shards = shards  # type: ignore[assignment]
    yield farm, shards


AREA = rect("M3", 0, 0, 100, 100)


def test_a_shard_refusing_part_way_leaves_no_shard_holding_it(stand_ins) -> None:
    farm, shards = stand_ins
    shards[2].fail = grpc.StatusCode.INVALID_ARGUMENT
    with pytest.raises(ServiceError) as refused:
        farm.declare_blockage(AREA)
    assert refused.value.code is grpc.StatusCode.INVALID_ARGUMENT and refused.value.field == "area"
    assert [s.held for s in shards] == [{}, {}, {}]


def test_an_unreachable_shard_is_named_as_it_may_hold_the_blockage(stand_ins) -> None:
    farm, shards = stand_ins
    shards[1].fail = grpc.StatusCode.UNAVAILABLE
    with pytest.raises(ServiceError) as lost:
        farm.declare_blockage(AREA)
    assert lost.value.code is grpc.StatusCode.UNAVAILABLE and lost.value.field == "blockage_id"
    assert "shard 1 (reply lost)" in lost.value.message
    assert shards[0].held == {}  # undone where it was declared


def test_an_undo_that_fails_names_the_shards_and_the_id_that_cleans_up(stand_ins) -> None:
    farm, shards = stand_ins
    shards[0].declare_blockage(AREA)  # shard 0 ahead: its ids now differ from the others'
    shards[2].fail = grpc.StatusCode.FAILED_PRECONDITION

    def declare_then_lose(area: pb.Shape) -> int:  # shard 1 takes it, then goes away
        shard_id = StandInShard.declare_blockage(shards[1], area)
        shards[1].fail = grpc.StatusCode.UNAVAILABLE
        return shard_id
    shards[1].declare_blockage = declare_then_lose  # type: ignore[method-assign]

    with pytest.raises(ServiceError) as failed:
        farm.declare_blockage(AREA)
    assert failed.value.code is grpc.StatusCode.FAILED_PRECONDITION
    assert "held by shard 1" in failed.value.message and "remove_blockage(2)" in failed.value.message
    assert list(shards[0].held) == [1] and list(shards[1].held) == [1]  # shard 0's own id 2 undone

    with pytest.raises(ServiceError) as still:  # shard 1 still away: kept for another try
        farm.remove_blockage(2)
    assert still.value.code is grpc.StatusCode.UNAVAILABLE and "shard(s) 1" in still.value.message
    shards[1].fail = None
    farm.remove_blockage(2)
    assert shards[1].held == {}
    with pytest.raises(ServiceError) as gone:
        farm.remove_blockage(2)
    assert gone.value.code is grpc.StatusCode.NOT_FOUND


def test_farm_ids_map_to_each_shards_own_id(stand_ins) -> None:
    farm, shards = stand_ins
    shards[1].declare_blockage(AREA)  # shard 1 ahead by one id
    first, second = farm.declare_blockage(AREA), farm.declare_blockage(AREA)
    assert (first, second) == (1, 2)  # shard 0's ids
    assert list(shards[1].held) == [1, 2, 3]
    farm.remove_blockage(first)
    assert [list(s.held) for s in shards] == [[2], [1, 3], [2]]  # shard 1 lost its 2, not its 1
