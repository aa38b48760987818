"""Generate the demo block ``lumen-demo-nets.json``: ~200 routed nets in lumen-6m.

Everything here is invented demo data: an imaginary block "blk_a" of 500 x 500 um
with cells "u<N>". Each net has one driver (an output pin with diffusion) and one to
four gate inputs (gate area per oxide class, 0.01-0.2 um^2, a few thick-oxide
inputs). Nets are routed as L-shapes, one per sink, on a vertical/horizontal layer
pair chosen by the net's span (short nets on M2/M3, long ones on M4/M5), with via
stacks from the M1 pins.

Most sinks are routed "from the driver": the lower layer's leg hangs on the driver,
so when that layer is etched the long conductor already sees the driver's diffusion
or no gate at all. A minority is routed "from the sink": the lower leg hangs on the
gate, and when it is long for its gate the net breaks a partial limit at that step.
That is how a handful of nets in the block come to violate. The engine decides
which ones do; this script only draws the geometry.

Run from the repository root (fixed seed, so the output is reproducible):

    .venv/bin/python service/etchguard/data/make_demo_nets.py [OUTPUT.json]
"""

from __future__ import annotations

import json
import math
import random
import sys
from pathlib import Path
from typing import Any

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent.parent))  # run as a plain script from a checkout

from etchguard import Deck, Shape, load_deck, run_shapes, via_shapes  # noqa: E402

SEED = 20240611
NET_COUNT = 200
BLOCK_UM = 500
GRID = 200  # DBU: placement pitch of pins
SINK_FIRST_SHARE = 0.06  # share of sinks routed with the lower leg on the gate side


def _snap(value: float) -> int:
    return int(round(value / GRID)) * GRID


def _pin(name: str, x: int, y: int, *, gate: dict[str, float] | None = None,
         diff: float = 0.0, cell_m1: float = 0.0) -> dict[str, Any]:
    """An M1 pin: a 140 x 420 DBU bar inside its cell, centred on (x, y)."""
    pin: dict[str, Any] = {"name": name, "layer": "M1",
                           "rects": [[x - 70, y - 210, x + 70, y + 210]]}
    if gate:
        pin["gate_area"] = gate
    if diff:
        pin["diff_area"] = diff
    if cell_m1:
        pin["cell_area"] = {"M1": cell_m1}
    return pin


def _stack(deck: Deck, x: int, y: int, top: int) -> list[Shape]:
    """Via stack from M1 up to routing layer ``top`` (a step index) at (x, y)."""
    shapes: list[Shape] = []
    for cut in range(1, top, 2):
        shapes.extend(via_shapes(deck, cut, x, y))
    return shapes


def _l_route(deck: Deck, start: tuple[int, int], end: tuple[int, int], vertical: int,
             horizontal: int, vertical_at_start: bool) -> list[Shape]:
    """An L from start to end: the vertical leg on ``vertical`` at the x of the end
    it belongs to, the horizontal leg on ``horizontal``, joined by a via stack."""
    (xs, ys), (xe, ye) = start, end
    if vertical_at_start:
        corner = (xs, ye)
        legs = [run_shapes(deck, vertical, xs, ys, xs, ye), run_shapes(deck, horizontal, xs, ye, xe, ye)]
    else:
        corner = (xe, ys)
        legs = [run_shapes(deck, vertical, xe, ys, xe, ye), run_shapes(deck, horizontal, xs, ys, xe, ys)]
    shapes = [s for leg in legs for s in leg]
    for cut in range(vertical + 1, horizontal, 2):
        shapes.extend(via_shapes(deck, cut, *corner))
    return shapes


def make_net(deck: Deck, rng: random.Random, index: int, next_cell: list[int]) -> dict[str, Any]:
    m = deck.layer_index
    block = BLOCK_UM * deck.dbu_per_micron
    span_um = rng.choices([rng.uniform(8, 40), rng.uniform(40, 120), rng.uniform(120, 320)],
                          weights=[60, 30, 10])[0]
    vertical, horizontal = (m["M2"], m["M3"]) if span_um < 45 else (m["M4"], m["M5"])
    span = span_um * deck.dbu_per_micron
    margin = int(span) + 2000
    xd = _snap(rng.uniform(margin, block - margin)) if block > 2 * margin else block // 2
    yd = _snap(rng.uniform(margin, block - margin)) if block > 2 * margin else block // 2

    def cell() -> str:
        next_cell[0] += rng.randint(1, 7)
        return f"u{next_cell[0]}"

    pins = [_pin(f"{cell()}.y", xd, yd, diff=round(rng.uniform(0.05, 0.6), 3),
                 cell_m1=round(rng.uniform(0.02, 0.08), 3))]
    shapes: list[Shape] = _stack(deck, xd, yd, horizontal)
    sinks = rng.choices([1, 2, 3, 4], weights=[35, 35, 20, 10])[0]
    used = {(xd, yd)}
    for k in range(sinks):
        while True:
            angle = rng.uniform(0, 2 * math.pi)
            reach = span * rng.uniform(0.4, 1.0)
            xs = _snap(xd + reach * math.cos(angle))
            ys = _snap(yd + reach * math.sin(angle))
            # distinct x and y from the driver, so that each leg has a length
            if abs(xs - xd) >= 2 * GRID and abs(ys - yd) >= 2 * GRID and (xs, ys) not in used:
                break
        used.add((xs, ys))
        oxide = "thick" if rng.random() < 0.08 else "thin"
        gate = round(math.exp(rng.uniform(math.log(0.01), math.log(0.2))), 4)
        pins.append(_pin(f"{cell()}.{'abcd'[k]}", xs, ys, gate={oxide: gate},
                         cell_m1=round(rng.uniform(0.01, 0.05), 3)))
        shapes.extend(_stack(deck, xs, ys, horizontal))
        sink_first = rng.random() < SINK_FIRST_SHARE
        # "from the driver": the vertical leg sits at the driver's x and hangs on it
        shapes.extend(_l_route(deck, (xd, yd), (xs, ys), vertical, horizontal,
                               vertical_at_start=not sink_first))
    return {"name": f"blk_a/n{index}", "pins": pins,
            "shapes": [{"layer": deck.layers[s.layer].name, "rect": list(s.rect)} for s in shapes]}


def demo_text() -> str:
    """The net file's text: the same for the same SEED, on any machine."""
    deck = load_deck(HERE / "lumen-6m.toml")
    rng = random.Random(SEED)
    next_cell = [100]
    nets = [make_net(deck, rng, 100 + 3 * i + rng.randint(0, 2), next_cell) for i in range(NET_COUNT)]
    # one net per line: readable diffs when the generator changes
    lines = ",\n".join(json.dumps(n, separators=(",", ":")) for n in nets)
    return '{"nets":[\n' + lines + "\n]}\n"


def main(argv: list[str] | None = None) -> None:
    args = sys.argv[1:] if argv is None else argv
    out = Path(args[0]) if args else HERE / "lumen-demo-nets.json"
    out.write_text(demo_text(), encoding="utf-8")
    print(f"wrote {NET_COUNT} nets to {out}")


if __name__ == "__main__":
    main()
