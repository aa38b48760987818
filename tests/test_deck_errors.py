"""Every rule-deck refusal the loader promises names the file, the entry and the field.

The deck format and its constraints are the contract's (the antenna model, "Rule deck
file (TOML)" and "Process steps": layers bottom-up in process order, routing and cut
layers interleaved, a cut between the two routing layers it joins).
"""

from __future__ import annotations

from pathlib import Path

import pytest

import etchguard as eg

HEAD = """[process]
name = "deck-errors-demo"
dbu_per_micron = 1000
cumulative_includes_cuts = false
"""

M1 = """
[[layers]]
name = "M1"
kind = "routing"
direction = "horizontal"
thickness_um = 0.1
wire_width = 100
"""

V1 = """
[[layers]]
name = "V1"
kind = "cut"
cut_size = 100
"""

M2 = """
[[layers]]
name = "M2"
kind = "routing"
direction = "vertical"
thickness_um = 0.2
wire_width = 100
"""

V2 = V1.replace("V1", "V2")

GOOD_RULE = """
[[rules]]
layer = "M1"
partial_max = 100.0
"""

GOOD = HEAD + M1 + V1 + M2 + GOOD_RULE


def load_error(tmp_path: Path, text: str) -> tuple[eg.DeckError, Path]:
    path = tmp_path / "lumen-test.toml"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(eg.DeckError) as info:
        eg.load_deck(path)
    return info.value, path


def assert_names(tmp_path: Path, text: str, where: str) -> eg.DeckError:
    """The refusal's field is exactly 'file: entry.field'."""
    err, path = load_error(tmp_path, text)
    assert err.field == f"{path}: {where}", (err.field, err.message)
    assert err.message
    assert str(path) in str(err) and where in str(err)
    return err


def test_the_base_deck_loads(tmp_path: Path) -> None:
    # The refusals below are variations of this deck; it must itself be fine.
    path = tmp_path / "good.toml"
    path.write_text(GOOD, encoding="utf-8")
    deck = eg.load_deck(path)
    assert [l.name for l in deck.layers] == ["M1", "V1", "M2"]


# -- unknown keys ------------------------------------------------------------------------

@pytest.mark.parametrize(("text", "where"), [
    (HEAD.replace("name =", "colour = 1\nname =") + M1 + V1 + M2, "process.colour"),
    (HEAD + M1.replace("kind =", "colour = 1\nkind =") + V1 + M2, "layers[0].colour"),
    (GOOD + 'layer_colour = "red"\n', "rules[0].layer_colour"),
    (GOOD + "[extras]\nx = 1\n", "deck.extras"),
])
def test_unknown_key(tmp_path: Path, text: str, where: str) -> None:
    err = assert_names(tmp_path, text, where)
    assert "unknown" in err.message


def test_key_of_the_other_layer_kind(tmp_path: Path) -> None:
    assert_names(tmp_path, HEAD + M1.replace("wire_width", "cut_size") + V1 + M2, "layers[0].cut_size")
    assert_names(tmp_path, HEAD + M1 + V1.replace("cut_size", "wire_width") + M2, "layers[1].wire_width")


# -- layer order -------------------------------------------------------------------------

@pytest.mark.parametrize(("text", "index", "name"), [
    (HEAD + V1 + M1 + M2, 0, "V1"),  # a cut at the bottom
    (HEAD + M1 + V1, 1, "V1"),  # a cut at the top
    (HEAD + M1 + V1 + V2 + M2, 1, "V1"),  # two cuts in a row
])
def test_cut_not_between_two_routing_layers(tmp_path: Path, text: str, index: int, name: str) -> None:
    err, path = load_error(tmp_path, text)
    # No single field is wrong here but the layer's place; the entry is named.
    assert str(path) in err.field and f"layers[{index}]" in err.field and name in err.field


def test_two_routing_layers_without_a_cut_between(tmp_path: Path) -> None:
    # The contract: layers are "routing (metal) and cut (via) layers interleaved:
    # M1, V1, M2, ...". M1 directly under M2 is out of order: nothing could ever
    # connect them (a cut joins the routing layers next to it).
    err, path = load_error(tmp_path, HEAD + M1 + M2 + GOOD_RULE)
    assert str(path) in err.field and "layers[1]" in err.field, (err.field, err.message)


def test_layer_listed_twice(tmp_path: Path) -> None:
    assert_names(tmp_path, HEAD + M1 + V1 + M2 + M2.replace('"vertical"', '"horizontal"'), "layers[3].name")


# -- rules -------------------------------------------------------------------------------

def test_rule_on_unknown_layer(tmp_path: Path) -> None:
    err = assert_names(tmp_path, GOOD.replace('layer = "M1"', 'layer = "M9"'), "rules[0].layer")
    assert "M9" in err.message


def test_side_rule_on_cut_layer(tmp_path: Path) -> None:
    rule = '\n[[rules]]\nlayer = "V1"\nmeasure = "side"\npartial_max = 5.0\n'
    err = assert_names(tmp_path, GOOD + rule, "rules[1].measure")
    assert "cut" in err.message


def test_side_rule_needs_thickness(tmp_path: Path) -> None:
    rule = '\n[[rules]]\nlayer = "M2"\nmeasure = "side"\npartial_max = 5.0\n'
    assert_names(tmp_path, HEAD + M1 + V1 + M2.replace("thickness_um = 0.2\n", "") + rule, "rules[0].measure")


def test_second_rule_for_the_same_layer_measure_oxide(tmp_path: Path) -> None:
    assert_names(tmp_path, GOOD + GOOD_RULE, "rules[1].layer")


def test_rule_without_any_limit(tmp_path: Path) -> None:
    assert_names(tmp_path, HEAD + M1 + V1 + M2 + '\n[[rules]]\nlayer = "M1"\narea_factor = 2.0\n', "rules[0].partial_max")


@pytest.mark.parametrize("points", [
    "[[0.0, 100.0], [0.0, 200.0]]",  # equal D
    "[[0.5, 100.0], [0.2, 200.0]]",  # decreasing D
])
def test_non_increasing_table_points(tmp_path: Path, points: str) -> None:
    err = assert_names(tmp_path, GOOD + f"diode_partial_max = {points}\n", "rules[0].diode_partial_max[1]")
    assert "increasing" in err.message


@pytest.mark.parametrize(("entry", "where"), [
    ("diode_cumulative_max = []", "rules[0].diode_cumulative_max"),
    ("diode_cumulative_max = [[0.0, 1.0, 2.0]]", "rules[0].diode_cumulative_max[0]"),
    ('diode_cumulative_max = [["a", 1.0]]', "rules[0].diode_cumulative_max[0]"),
])
def test_malformed_table(tmp_path: Path, entry: str, where: str) -> None:
    assert_names(tmp_path, GOOD + entry + "\n", where)


# -- negative values ---------------------------------------------------------------------

@pytest.mark.parametrize(("text", "where"), [
    (GOOD.replace("partial_max = 100.0", "partial_max = -100.0"), "rules[0].partial_max"),
    (GOOD + "cumulative_max = -1.0\n", "rules[0].cumulative_max"),
    (GOOD + "area_factor = -1.0\n", "rules[0].area_factor"),
    (GOOD + "diode_gate_factor = -1.0\n", "rules[0].diode_gate_factor"),
    (GOOD + "diode_area_credit = -0.5\n", "rules[0].diode_area_credit"),
    (GOOD + "diode_partial_max = [[-0.1, 100.0]]\n", "rules[0].diode_partial_max[0]"),
    (GOOD + "diode_partial_max = [[0.1, -100.0]]\n", "rules[0].diode_partial_max[0]"),
    (GOOD.replace("thickness_um = 0.1", "thickness_um = -0.1"), "layers[0].thickness_um"),
    (GOOD.replace("wire_width = 100\n", "wire_width = -100\n", 1), "layers[0].wire_width"),
    (GOOD.replace("cut_size = 100", "cut_size = -100"), "layers[1].cut_size"),
    (GOOD.replace("cut_size = 100", "cut_size = 100\nenclosure = -5"), "layers[1].enclosure"),
    (GOOD.replace("dbu_per_micron = 1000", "dbu_per_micron = -1000"), "process.dbu_per_micron"),
])
def test_negative_value(tmp_path: Path, text: str, where: str) -> None:
    err = assert_names(tmp_path, text, where)
    assert "-" in err.message  # the offending value is quoted back


@pytest.mark.parametrize(("text", "where"), [
    (GOOD.replace("partial_max = 100.0", "partial_max = nan"), "rules[0].partial_max"),
    (GOOD.replace("partial_max = 100.0", 'partial_max = "100"'), "rules[0].partial_max"),
    (GOOD.replace("dbu_per_micron = 1000", "dbu_per_micron = 1000.5"), "process.dbu_per_micron"),
    (GOOD.replace("cumulative_includes_cuts = false", 'cumulative_includes_cuts = "no"'),
     "process.cumulative_includes_cuts"),
    (GOOD.replace('kind = "cut"', 'kind = "via"'), "layers[1].kind"),
    (GOOD.replace('"horizontal"', '"diagonal"'), "layers[0].direction"),
    (GOOD + 'measure = "volume"\n', "rules[0].measure"),
])
def test_wrong_type_or_choice(tmp_path: Path, text: str, where: str) -> None:
    assert_names(tmp_path, text, where)


# -- missing required fields -------------------------------------------------------------

@pytest.mark.parametrize(("text", "where"), [
    (GOOD.replace('name = "deck-errors-demo"\n', ""), "process.name"),
    (GOOD.replace("dbu_per_micron = 1000\n", ""), "process.dbu_per_micron"),
    (M1 + V1 + M2 + GOOD_RULE, "deck.process"),
    (HEAD + GOOD_RULE, "deck.layers"),
    (GOOD.replace('name = "M1"\n', ""), "layers[0].name"),
    (GOOD.replace('kind = "routing"\n', "", 1), "layers[0].kind"),
    (GOOD.replace('direction = "horizontal"\n', ""), "layers[0].direction"),
    (GOOD.replace('layer = "M1"\n', ""), "rules[0].layer"),
])
def test_missing_required_field(tmp_path: Path, text: str, where: str) -> None:
    err = assert_names(tmp_path, text, where)
    assert "required" in err.message or "must" in err.message


# -- not a deck at all -------------------------------------------------------------------

def test_bad_toml_names_the_file_and_the_line(tmp_path: Path) -> None:
    err, path = load_error(tmp_path, GOOD + "[[rules]\nlayer = \n")
    assert err.field == str(path)
    assert "TOML" in err.message
    assert err.line == GOOD.count("\n") + 1  # tomllib reports the line of the header


def test_unreadable_file(tmp_path: Path) -> None:
    path = tmp_path / "absent.toml"
    with pytest.raises(eg.DeckError) as info:
        eg.load_deck(path)
    assert info.value.field == str(path)


# -- the chain flag and the area reduction table -----------------------------------------

@pytest.mark.parametrize(("text", "where"), [
    # cumulative_plus_cut is a boolean, on routing and cut layers alike.
    (HEAD + M1 + V1 + M2.replace('kind = "routing"', 'kind = "routing"\ncumulative_plus_cut = "yes"')
     + GOOD_RULE, "layers[2].cumulative_plus_cut"),
    (HEAD + M1 + V1.replace('kind = "cut"', 'kind = "cut"\ncumulative_plus_cut = 1') + M2 + GOOD_RULE,
     "layers[1].cumulative_plus_cut"),
])
def test_plus_cut_must_be_a_boolean(tmp_path: Path, text: str, where: str) -> None:
    err = assert_names(tmp_path, text, where)
    assert "true or false" in err.message


def test_plus_cut_is_read_on_routing_and_cut_layers(tmp_path: Path) -> None:
    # The refusals above are variations of this deck; here the flag is a proper boolean
    # on a cut layer (V1) and on a routing layer (M2), and both are kept.
    text = (HEAD + M1 + V1.replace('kind = "cut"', 'kind = "cut"\ncumulative_plus_cut = true')
            + M2.replace('kind = "routing"', 'kind = "routing"\ncumulative_plus_cut = true') + GOOD_RULE)
    path = tmp_path / "good.toml"
    path.write_text(text, encoding="utf-8")
    deck = eg.load_deck(path)
    assert [l.cumulative_plus_cut for l in deck.layers] == [False, True, True]


@pytest.mark.parametrize(("entry", "where", "words"), [
    ("diode_area_reduction = [[0.0, 1.0], [0.0, 0.5]]", "rules[0].diode_area_reduction[1]", "increasing"),
    ("diode_area_reduction = [[0.5, 1.0], [0.2, 0.5]]", "rules[0].diode_area_reduction[1]", "increasing"),
    ("diode_area_reduction = [[0.0, -0.5]]", "rules[0].diode_area_reduction[0]", "non-negative"),
    ("diode_area_reduction = [[-0.1, 0.5]]", "rules[0].diode_area_reduction[0]", "non-negative"),
    ("diode_area_reduction = [[0.0, nan]]", "rules[0].diode_area_reduction[0]", "finite"),
    ("diode_area_reduction = [[0.0, inf]]", "rules[0].diode_area_reduction[0]", "finite"),
    ('diode_area_reduction = [[0.0, "half"]]', "rules[0].diode_area_reduction[0]", "finite"),
    ("diode_area_reduction = [[0.0, 1.0, 2.0]]", "rules[0].diode_area_reduction[0]", "pair"),
    ("diode_area_reduction = []", "rules[0].diode_area_reduction", "reduction factor"),
    ("diode_area_reduction = 0.5", "rules[0].diode_area_reduction", "reduction factor"),
])
def test_bad_area_reduction_table(tmp_path: Path, entry: str, where: str, words: str) -> None:
    err = assert_names(tmp_path, GOOD + entry + "\n", where)
    assert words in err.message, err.message


def test_area_reduction_table_is_kept(tmp_path: Path) -> None:
    # A factor of 0 is allowed (>= 0): it removes the layer's conductor entirely.
    path = tmp_path / "good.toml"
    path.write_text(GOOD + "diode_area_reduction = [[0, 1], [0.2, 0.0]]\n", encoding="utf-8")
    rule = eg.load_deck(path).rules[0]
    assert rule.diode_area_reduction == ((0.0, 1.0), (0.2, 0.0))
    assert rule.ratio(1.0, 0.1, 0.2) == 0.0  # max(0, 1 * r(0.2) = 0 * 1.0 - 0) / 0.1
