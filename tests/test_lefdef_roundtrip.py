"""Round trips: a TOML deck written as a tech LEF reads back as the same deck, and a JSON
net written as cell LEF + DEF checks to the same figures, on random decks and nets.

The random decks and nets are those of test_reference_agreement.py (the strategies that
hold the engine to the independent reference). The writers below put each value in the
LEF/DEF statement the contract's mapping table names for it (the antenna model, "The
same model from the open LEF/DEF standard"); reading must then give the deck and the
check figures back to the bit. Oxide classes: LEF names OXIDE1..4, so "thin" stays the
default class and the others come back as "oxide2", "oxide3" (renamed on the TOML side
before comparing). A process-wide cumulative_includes_cuts and area/side rules of one
layer and oxide with different diode factors have no LEF form; such decks are skipped.
"""

from __future__ import annotations

import copy
from pathlib import Path
from typing import Any

import etchguard as eg
from etchguard._lef import read_lef
from etchguard._lef_deck import deck_from_lef
from etchguard._lefdef import open_design
from etchguard._lefdef_tokens import Notes
from hypothesis import HealthCheck, assume, given, settings
from test_reference_agreement import cases

SETTINGS = settings(max_examples=60, deadline=None,
                    suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture])
SIDE = {"area": "", "side": "SIDE"}


def oxide_names(deck: dict[str, Any], nets: list[dict[str, Any]]) -> dict[str, str]:
    """Deck oxide -> the class it comes back as from LEF (thin first, then by name)."""
    found = {r.get("oxide", "thin") for r in deck["rules"]}
    for net in nets:
        for pin in net["pins"]:
            gate = pin.get("gate_area")
            found |= set(gate) if isinstance(gate, dict) else {"thin"}
    others = sorted(found - {"thin"})
    assume(len(others) <= 3)
    return {"thin": "thin", **{name: f"oxide{i}" for i, name in enumerate(others, 2)}}


def expressible(deck: dict[str, Any]) -> bool:
    if deck["process"].get("cumulative_includes_cuts"):
        return False
    # LEF states diffusion factors and the area reduction once per layer and oxide model
    factors: dict[tuple[str, str], set[tuple[object, ...]]] = {}
    for r in deck["rules"]:
        key = (r["layer"], r.get("oxide", "thin"))
        reduction = tuple(tuple(p) for p in r.get("diode_area_reduction", ()))
        factors.setdefault(key, set()).add((r.get("diode_gate_factor", 0.0), r.get("diode_area_credit", 0.0),
                                            reduction))
    return all(len(v) == 1 for v in factors.values())


def um(value: int, dbu: int) -> str:
    return repr(value / dbu)


def pwl(table: list[list[float]]) -> str:
    return "PWL ( " + " ".join(f"( {x!r} {y!r} )" for x, y in table) + " )"


def deck_as_lef(deck: dict[str, Any], oxides: dict[str, str]) -> str:
    """A technology LEF stating the deck, statement by statement."""
    dbu = deck["process"]["dbu_per_micron"]
    out = ["VERSION 5.8 ;", "UNITS", f"  DATABASE MICRONS {dbu} ;", "END UNITS"]
    layers = deck["layers"]
    for i, layer in enumerate(layers):
        out += [f"LAYER {layer['name']}", f"  TYPE {layer['kind'].upper()} ;"]
        if layer.get("cumulative_plus_cut"):
            out.append("  ANTENNACUMROUTINGPLUSCUT ;")
        if layer["kind"] == "routing":
            out.append(f"  DIRECTION {layer['direction'].upper()} ;")
            if "wire_width" in layer:
                out.append(f"  WIDTH {um(layer['wire_width'], dbu)} ;")
            if "spacing" in layer:
                out.append(f"  SPACING {um(layer['spacing'], dbu)} ;")
            if "thickness_um" in layer:
                out.append(f"  THICKNESS {layer['thickness_um']!r} ;")
        by_oxide: dict[str, list[dict[str, Any]]] = {}
        for rule in deck["rules"]:
            if rule["layer"] == layer["name"]:
                by_oxide.setdefault(oxides[rule.get("oxide", "thin")], []).append(rule)
        for oxide, rules in by_oxide.items():
            out.append(f"  ANTENNAMODEL OXIDE{1 if oxide == 'thin' else oxide[-1]} ;")
            for rule in rules:
                side = SIDE[rule.get("measure", "area")]
                if "partial_max" in rule:
                    out.append(f"  ANTENNA{side}AREARATIO {rule['partial_max']!r} ;")
                if "diode_partial_max" in rule:
                    out.append(f"  ANTENNADIFF{side}AREARATIO {pwl(rule['diode_partial_max'])} ;")
                if "cumulative_max" in rule:
                    out.append(f"  ANTENNACUM{side}AREARATIO {rule['cumulative_max']!r} ;")
                if "diode_cumulative_max" in rule:
                    out.append(f"  ANTENNACUMDIFF{side}AREARATIO {pwl(rule['diode_cumulative_max'])} ;")
                if "area_factor" in rule:
                    only = " DIFFUSEONLY" if rule.get("factor_with_diode_only") else ""
                    out.append(f"  ANTENNA{side}AREAFACTOR {rule['area_factor']!r}{only} ;")
            first = rules[0]
            if first.get("diode_gate_factor"):
                out.append(f"  ANTENNAGATEPLUSDIFF {first['diode_gate_factor']!r} ;")
            if first.get("diode_area_credit"):
                out.append(f"  ANTENNAAREAMINUSDIFF {first['diode_area_credit']!r} ;")
            if first.get("diode_area_reduction"):
                points = " ".join(f"( {x!r} {y!r} )" for x, y in first["diode_area_reduction"])
                out.append(f"  ANTENNAAREADIFFREDUCEPWL ( {points} ) ;")
        out.append(f"END {layer['name']}")
    for i, layer in enumerate(layers):  # the deck's square via as each cut layer's DEFAULT via
        if layer["kind"] != "cut" or "cut_size" not in layer:
            continue
        half_cut = layer["cut_size"] / 2
        half_pad = half_cut + layer.get("enclosure", 0)
        out.append(f"VIA {layer['name']}_DEFAULT DEFAULT")
        for name, half in ((layers[i - 1]["name"], half_pad), (layer["name"], half_cut),
                           (layers[i + 1]["name"], half_pad)):
            h = repr(half / dbu)
            out += [f"  LAYER {name} ;", f"    RECT -{h} -{h} {h} {h} ;"]
        out.append(f"END {layer['name']}_DEFAULT")
    out.append("END LIBRARY")
    return "\n".join(out) + "\n"


def gates(pin: dict[str, Any]) -> dict[str, float]:
    gate = pin.get("gate_area", {})
    return gate if isinstance(gate, dict) else {"thin": gate}


def nets_as_lef_def(deck: dict[str, Any], nets: list[dict[str, Any]], oxides: dict[str, str]) -> tuple[str, str]:
    """A cell LEF with one macro per pin (placed N at 0, 0, so LEF coordinates are the
    pin's own) and a DEF wiring every shape: RECT from a point on routing layers, a
    via of the one cut on cut layers."""
    dbu = deck["process"]["dbu_per_micron"]
    names = [l["name"] for l in deck["layers"]]
    lef, components, vias, nets_out = ["VERSION 5.8 ;"], [], [], []
    for n, net in enumerate(nets):
        connections, paths = [], []
        for p, pin in enumerate(net["pins"]):
            macro = f"CELL_{n}_{p}"
            lef += [f"MACRO {macro}", "  CLASS CORE ;", "  SIZE 1 BY 1 ;", "  PIN a"]
            for oxide, area in gates(pin).items():
                lef += [f"    ANTENNAMODEL OXIDE{1 if oxides[oxide] == 'thin' else oxides[oxide][-1]} ;",
                        f"    ANTENNAGATEAREA {area!r} ;"]
            if pin.get("diff_area"):
                lef.append(f"    ANTENNADIFFAREA {pin['diff_area']!r} ;")
            for layer, area in pin.get("cell_area", {}).items():
                kind = "CUT" if layer.startswith("V") else "METAL"
                lef.append(f"    ANTENNAPARTIAL{kind}AREA {area!r} LAYER {layer} ;")
            for layer, area in pin.get("cell_side_area", {}).items():
                lef.append(f"    ANTENNAPARTIALMETALSIDEAREA {area!r} LAYER {layer} ;")
            for block in pin.get("block_car", []):  # after the gate areas: each under its own model
                model = oxides[block.get("oxide", "thin")]
                keyword = ("ANTENNAMAXSIDEAREACAR" if block.get("measure") == "side" else
                           "ANTENNAMAXCUTCAR" if block["layer"].startswith("V") else "ANTENNAMAXAREACAR")
                lef += [f"    ANTENNAMODEL OXIDE{1 if model == 'thin' else model[-1]} ;",
                        f"    {keyword} {block['ratio']!r} LAYER {block['layer']} ;"]
            lef.append("    PORT")
            for r in pin["rects"]:  # a rectangle on a layer of its own: a port on several layers
                layer, r = (r["layer"], r["rect"]) if isinstance(r, dict) else (pin["layer"], r)
                lef += [f"      LAYER {layer} ;",
                        f"        RECT {um(r[0], dbu)} {um(r[1], dbu)} {um(r[2], dbu)} {um(r[3], dbu)} ;"]
            lef += ["    END", "  END a", f"END {macro}"]
            components.append(f"- c{n}_{p} {macro} + PLACED ( 0 0 ) N ;")
            connections.append(f"( c{n}_{p} a )")
        for s, shape in enumerate(net["shapes"]):
            x1, y1, x2, y2 = shape["rect"]
            if shape["layer"].startswith("M"):
                paths.append(f"{shape['layer']} ( {x1} {y1} ) RECT ( 0 0 {x2 - x1} {y2 - y1} )")
            else:
                via = f"CUT_{n}_{s}"
                vias.append(f"- {via} + RECT {shape['layer']} ( 0 0 ) ( {x2 - x1} {y2 - y1} ) ;")
                below = names[names.index(shape["layer"]) - 1]
                paths.append(f"{below} ( {x1} {y1} ) {via}")
        wiring = ("\n  + ROUTED " + "\n    NEW ".join(paths)) if paths else ""
        nets_out.append(f"- {net['name']} {' '.join(connections)}{wiring} ;")
    lef.append("END LIBRARY")
    def_text = "\n".join([
        "VERSION 5.8 ;", "DESIGN roundtrip ;", f"UNITS DISTANCE MICRONS {dbu} ;",
        f"VIAS {len(vias)} ;", *vias, "END VIAS",
        f"COMPONENTS {len(components)} ;", *components, "END COMPONENTS",
        f"NETS {len(nets_out)} ;", *nets_out, "END NETS", "END DESIGN"]) + "\n"
    return "\n".join(lef) + "\n", def_text


def renamed(deck: dict[str, Any], nets: list[dict[str, Any]], oxides: dict[str, str]) -> tuple[dict[str, Any], list[dict[str, Any]]]:
    deck, nets = copy.deepcopy(deck), copy.deepcopy(nets)
    for rule in deck["rules"]:
        rule["oxide"] = oxides[rule.get("oxide", "thin")]
    for net in nets:
        for pin in net["pins"]:
            pin["gate_area"] = {oxides[k]: v for k, v in gates(pin).items()}
            for block in pin.get("block_car", []):
                block["oxide"] = oxides[block.get("oxide", "thin")]
    return deck, nets


def checked(deck: eg.Deck, specs: list[eg.NetSpec]) -> list[dict[str, Any]]:
    engine = eg.Engine(deck)
    out = []
    for spec in specs:
        engine.open_net(spec.name, spec.pins, spec.layer_range, spec.shapes)
        report = engine.check(spec.name).as_dict()
        # A tie names the first gate pin, and a DEF lists a net's pins in its own order:
        # the figures must agree, the tie's pin name need not.
        for check in report["checks"]:  # type: ignore[attr-defined]
            del check["gate"]
        out.append(report)
        engine.close_net(spec.name)
    return out


@SETTINGS
@given(cases())
def test_deck_and_nets_survive_lef_and_def(tmp_path: Path, case: tuple[dict[str, Any], dict[str, Any], Any]) -> None:
    deck_data, net, _ = case
    assume(expressible(deck_data))
    oxides = oxide_names(deck_data, [net])
    tech = tmp_path / "tech.lef"
    tech.write_text(deck_as_lef(deck_data, oxides), encoding="utf-8")
    cells_text, def_text = nets_as_lef_def(deck_data, [net], oxides)
    cells, design = tmp_path / "cells.lef", tmp_path / "design.def"
    cells.write_text(cells_text, encoding="utf-8")
    design.write_text(def_text, encoding="utf-8")

    want_deck, want_nets = renamed(deck_data, [net], oxides)
    expected = eg.parse_deck(want_deck, "toml")
    notes = Notes()
    got = deck_from_lef(read_lef([tech], notes), notes)
    assert got.layers == expected.layers
    assert sorted(got.rules, key=repr) == sorted(expected.rules, key=repr)

    opened = open_design([tech, cells], design)
    specs = list(opened.nets)
    assert checked(opened.deck, specs) == checked(expected, eg.parse_net_file(expected, {"nets": want_nets}))
