"""Kinds are enums, in the proto and in the package: a kind is never a bare string.

The proto's advice answers carry ``OptionStatus`` and ``LimitedBy`` enums; the package's
records carry ``StrEnum`` members (each equal to the word a user reads), so a type
checker tells a measure from a ratio kind, and a typo in a comparison cannot pass.
"""

from __future__ import annotations

from etchguard import Engine, loads_deck
from etchguard._kinds import LayerKind, LimitedBy, Measure, OptionStatus, RatioKind
from etchguard.v1 import etchguard_pb2 as pb
from test_advice import deck_text, open_far_side


def test_advice_kinds_are_proto_enums():
    status = pb.LayerOption.DESCRIPTOR.fields_by_name["status"]
    limited = pb.JumperAdvice.DESCRIPTOR.fields_by_name["limited_by"]
    assert status.enum_type is not None and status.enum_type.name == "OptionStatus"
    assert limited.enum_type is not None and limited.enum_type.name == "LimitedBy"
    # Every package word has its proto value, and no proto value lacks a word.
    assert {f"OPTION_STATUS_{s.name}" for s in OptionStatus} == \
        set(pb.OptionStatus.keys()) - {"OPTION_STATUS_UNSPECIFIED"}
    assert {f"LIMITED_BY_{k.name}" for k in LimitedBy if k is not LimitedBy.NONE} == \
        set(pb.LimitedBy.keys()) - {"LIMITED_BY_UNSPECIFIED"}


def test_package_records_carry_enum_members():
    deck = loads_deck(deck_text())
    assert all(isinstance(layer.kind, LayerKind) for layer in deck.layers)
    assert all(isinstance(rule.measure, Measure) for rule in deck.rules)
    engine = Engine(deck)
    open_far_side(engine, deck)
    adv = engine.advise("n", deck.layer_index["M1"], 50, 50, 50050, 50)
    assert adv.options and all(isinstance(o.status, OptionStatus) for o in adv.options)
    assert adv.jumper is not None and isinstance(adv.jumper.limited_by, LimitedBy)
    checks = engine.check("n").checks
    assert checks and all(isinstance(c.measure, Measure) and isinstance(c.kind, RatioKind) for c in checks)
    # The members are the words users read: JSON and text output are unchanged.
    assert OptionStatus.LEGAL == "legal" and LimitedBy.HOP_ROOM == "hop_room" and Measure.SIDE == "side"
