"""The design-wide obstacle index: kept in step with commits, removals, closes and
deck reloads; bulk-loaded; its conflict test held to shapely's distance."""

from __future__ import annotations

import random

from shapely.geometry import box

from etchguard import Engine, InputError, Shape, loads_deck, make_pin
from etchguard._obstacles import BULK_MIN, ObstacleIndex, conflicts_with
from test_advice import deck_text

import pytest


def test_conflict_rule_matches_shapely_distance():
    # shapely's box distance is the Euclidean distance of the closed rectangles
    rng = random.Random(3)
    for _ in range(2000):
        a = (rng.randrange(0, 500), rng.randrange(0, 500))
        b = (rng.randrange(0, 500), rng.randrange(0, 500))
        ra = (a[0], a[1], a[0] + rng.randrange(1, 120), a[1] + rng.randrange(1, 120))
        rb = (b[0], b[1], b[0] + rng.randrange(1, 120), b[1] + rng.randrange(1, 120))
        spacing = rng.choice([0, 50, 100])
        d = box(*ra).distance(box(*rb))
        assert conflicts_with(ra, rb, spacing) == (d == 0 or d < spacing)


def test_index_follows_the_engine():
    deck = loads_deck(deck_text(), "obstacles")
    engine = Engine(deck)
    M3 = deck.layer_index["M3"]
    pin = make_pin(deck, "p", "M1", [[0, 0, 100, 100]], {"thin": 0.1})
    many = [Shape(M3, (i * 300, 1000, i * 300 + 100, 1100)) for i in range(BULK_MIN + 10)]
    engine.open_net("a", [pin], None, many)  # bulk path (stream constructor)
    index = engine._obstacles
    probe = (600, 1000, 700, 1100)
    # the overlapped one only: its neighbours are 200 DBU away, beyond a spacing of 100 ...
    assert [c.rect for c in index.conflicts("b", M3, probe, 100)] == [(600, 1000, 700, 1100)]
    # ... and within one of 250
    assert len(index.conflicts("b", M3, probe, 250)) == 3
    assert index.conflicts("a", M3, probe, 100) == []  # a net never blocks itself
    ids = engine.commit("a", [Shape(M3, (0, 5000, 100, 5100))])
    assert index.conflicts("b", M3, (0, 5150, 100, 5250), 100)
    engine.remove("a", ids)
    assert not index.conflicts("b", M3, (0, 5150, 100, 5250), 100)
    # pins are that net's metal too
    assert index.conflicts("b", 0, (150, 0, 250, 100), 100)
    bid = engine.declare_blockage(M3, (0, 9000, 10, 9010))
    engine.load_deck(loads_deck(deck_text(), "obstacles-again"))  # rebuild keeps all
    assert index.conflicts("b", M3, probe, 100) and index.conflicts("b", M3, (0, 9000, 5, 9005), 0)
    engine.close_net("a")
    assert not index.conflicts("b", M3, probe, 100)
    assert [c.blockage_id for c in index.conflicts("b", M3, (0, 9000, 5, 9005), 0)] == [bid]


def test_deck_without_a_blockage_layer_is_refused_and_nothing_changes():
    deck = loads_deck(deck_text(), "obstacles")
    engine = Engine(deck)
    engine.declare_blockage(deck.layer_index["M5"], (0, 0, 10, 10))
    small = deck_text().split('[[layers]]\nname = "V4"')[0] + "".join(
        f'\n[[rules]]\nlayer = "{m}"\nmeasure = "area"\npartial_max = 400.0\n' for m in ("M1", "M2", "M3", "M4"))
    with pytest.raises(InputError):
        engine.load_deck(loads_deck(small, "four-metals"))
    assert engine.deck is deck
    assert engine._obstacles.conflicts("x", deck.layer_index["M5"], (0, 0, 5, 5), 0)


def test_single_inserts_and_stream_build_agree():
    rng = random.Random(9)
    rects = []
    for _ in range(600):
        x, y = rng.randrange(0, 20000), rng.randrange(0, 20000)
        rects.append((x, y, x + rng.randrange(1, 400), y + rng.randrange(1, 400)))
    one_by_one, bulk = ObstacleIndex(1), ObstacleIndex(1)
    for i, r in enumerate(rects):
        one_by_one.add_net_items(f"n{i % 7}", [(0, r, ("shape", i))])
    bulk.add_net_items("all", [(0, r, ("shape", i)) for i, r in enumerate(rects)])
    for _ in range(200):
        x, y = rng.randrange(0, 20000), rng.randrange(0, 20000)
        q = (x, y, x + 300, y + 300)
        want = sorted(r for r in rects if conflicts_with(q, r, 150))
        assert sorted(c.rect for c in bulk.conflicts("other", 0, q, 150)) == want
        assert sorted(c.rect for c in one_by_one.conflicts("other", 0, q, 150)) == want
