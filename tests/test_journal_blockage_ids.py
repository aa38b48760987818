"""Blockage ids a caller asks for, through the journal and snapshots (engine level).

An asked id is journaled like a picked one and moves the engine's next id past it, so
a restart must bring back every blockage under its id and the same next id, whether
the state comes from the journal alone, from a snapshot alone, or from a snapshot and
the journal records written after it. The engine refuses an id held already or out of
range and changes nothing, journal included; when picked ids would pass the range,
picking is refused, while asking for a free id still works.
"""

from __future__ import annotations

import pytest
from etchguard import Engine, load_deck
from etchguard._errors import AlreadyExistsError, InputError, LimitExceededError
from etchguard._journal import Journal
from etchguard._obstacles import MAX_BLOCKAGE_ID
from grpc_fixtures import DEMO_DECK

TEXT = DEMO_DECK.read_text(encoding="utf-8")
AREA = (0, 0, 100, 100)
LAYER = 2


def _held(engine: Engine) -> tuple[list, int]:
    image, _ = engine.export_state(lambda: None)
    return sorted(image.blockages.items()), image.next_blockage_id


def _open(state) -> tuple[Engine, Journal]:
    engine = Engine()
    journal = Journal.open(state, engine, sync="none", snapshot_every=0)
    if engine.deck_text is None:
        engine.load_deck(load_deck(DEMO_DECK), TEXT)
    return engine, journal


@pytest.mark.parametrize("snapshot_at", ["never", "end", "middle"])
def test_asked_ids_and_the_next_id_survive_a_restart(tmp_path, snapshot_at) -> None:
    state = tmp_path / "state"
    engine, journal = _open(state)
    assert engine.declare_blockage(LAYER, AREA) == 1
    assert engine.declare_blockage(LAYER, AREA, 100) == 100
    if snapshot_at == "middle":
        journal.snapshot()  # the records after this one are replayed over the snapshot
    assert engine.declare_blockage(LAYER, AREA) == 101
    assert engine.declare_blockage(LAYER, AREA, 50) == 50
    engine.remove_blockage(100)
    assert engine.declare_blockage(LAYER, AREA, 500) == 500
    before = _held(engine)
    assert before[1] == 501
    journal.close(snapshot=snapshot_at == "end")

    engine, journal = _open(state)
    try:
        assert _held(engine) == before
        assert engine.declare_blockage(LAYER, AREA) == 501
        with pytest.raises(AlreadyExistsError):
            engine.declare_blockage(LAYER, AREA, 50)
    finally:
        journal.close()


@pytest.mark.parametrize("asked, error", [
    (1, AlreadyExistsError), (0, InputError), (-3, InputError), (True, InputError),
    (MAX_BLOCKAGE_ID + 1, InputError),
])
def test_a_refused_asked_id_changes_nothing_journal_included(tmp_path, asked, error) -> None:
    state = tmp_path / "state"
    engine, journal = _open(state)
    engine.declare_blockage(LAYER, AREA)
    before = _held(engine)
    with pytest.raises(error) as refused:
        engine.declare_blockage(LAYER, (0, 0, 10, 10), asked)
    assert refused.value.field == "blockage_id"
    assert _held(engine) == before
    journal.close(snapshot=False)
    engine, journal = _open(state)
    try:
        assert _held(engine) == before  # nothing of the refused call was journaled
    finally:
        journal.close()


def test_picking_stops_at_the_end_of_the_range_and_asking_still_works() -> None:
    engine = Engine()
    engine.load_deck(load_deck(DEMO_DECK), TEXT)
    assert engine.declare_blockage(LAYER, AREA, MAX_BLOCKAGE_ID) == MAX_BLOCKAGE_ID
    with pytest.raises(LimitExceededError) as used_up:
        engine.declare_blockage(LAYER, AREA)
    assert used_up.value.field == "blockage_id"
    assert engine.declare_blockage(LAYER, AREA, 2) == 2
