"""Generate the router demo's invented blocks (seeded, so the output is reproducible).

Two blocks in the invented lumen-6m process, pins only (the router draws the wires):

* ``data/blk_r.json``: about 300 nets on a 100 x 100 um block, for ``make demo``;
* ``data/blk_r_small.json``: 36 nets on a 50 x 50 um block, for the tests.

Every net has one driver (an output pin with diffusion, 0.05-0.6 um^2) and one to four
gate inputs. Thin-oxide input gates are 0.01-0.12 um^2 (log-uniform), one input in
twelve is thick oxide (0.1-0.5 um^2): magnitudes of small standard cells (from
memory, demo values). Pins are M1 bars of 140 x 700 DBU on the M1/M2 track grid,
with in-cell M1 conductor. Most nets are local; a tail is long enough that a gate
far from its driver can collect more conductor than its limits allow when a router
that does not look at antenna ratios leaves a long run on the gate side.

    .venv/bin/python client_examples/router/make_blocks.py
"""

from __future__ import annotations

import json
import math
import random
from dataclasses import dataclass
from pathlib import Path
from typing import Any

HERE = Path(__file__).resolve().parent
DATA = HERE / "data"
PITCH = 280  # DBU: the M1/M2/M3 track pitch of lumen-6m (wire_width 140 + spacing 140)
PIN_HALF_HEIGHT = 350  # DBU: a pin bar covers its own M1 track and one above and below
LAYER_RANGE = ("M1", "M5")  # M6's 1.6 um pitch is left to power in this invented block


@dataclass(frozen=True)
class BlockPlan:
    name: str
    seed: int
    nets: int
    size_um: float
    # share of short / medium / long nets and their span ranges in um
    span_weights: tuple[float, float, float]
    spans_um: tuple[tuple[float, float], tuple[float, float], tuple[float, float]]


PLANS = (
    BlockPlan("blk_r", 20240917, 300, 100.0, (55, 33, 12), ((5, 25), (25, 60), (60, 95))),
    BlockPlan("blk_r_small", 20240918, 36, 50.0, (40, 40, 20), ((6, 20), (20, 36), (36, 46))),
)


def _pin(name: str, i: int, j: int, *, gate: dict[str, float] | None = None,
         diff: float = 0.0, cell_m1: float = 0.0) -> dict[str, Any]:
    x, y = PITCH + i * PITCH, PITCH + j * PITCH
    pin: dict[str, Any] = {"name": name, "layer": "M1",
                           "rects": [[x - 70, y - PIN_HALF_HEIGHT, x + 70, y + PIN_HALF_HEIGHT]]}
    if gate:
        pin["gate_area"] = gate
    if diff:
        pin["diff_area"] = diff
    if cell_m1:
        pin["cell_area"] = {"M1": cell_m1}
    return pin


def make_block(plan: BlockPlan) -> dict[str, Any]:
    rng = random.Random(plan.seed)
    nodes = int(plan.size_um * 1000) // PITCH - 2  # node indices 0 .. nodes-1 on both axes
    # Placement sites of 4 columns x 6 rows, a pin at each site's centre: neighbouring
    # pins leave their via landing pads and M2 tracks room (one track between them).
    taken: set[tuple[int, int]] = set()

    def site(i: float, j: float) -> tuple[int, int]:
        return int(i // 4), int(j // 6)

    def free_site(i: float, j: float) -> bool:
        ci, cj = site(i, j)
        return 0 <= ci < nodes // 4 and 0 <= cj < nodes // 6 and (ci, cj) not in taken

    def place(i: float, j: float) -> tuple[int, int]:
        ci, cj = site(i, j)
        taken.add((ci, cj))
        return 4 * ci + 2, 6 * cj + 3

    cell_no = 100
    nets = []
    for n in range(plan.nets):
        kind = rng.choices((0, 1, 2), weights=plan.span_weights)[0]
        span = rng.uniform(*plan.spans_um[kind]) * 1000 / PITCH  # in grid steps
        for _ in range(1000):
            di, dj = rng.randrange(nodes), rng.randrange(nodes)
            if free_site(di, dj):
                break
        else:
            raise RuntimeError(f"{plan.name}: no room for a driver of net {n}")
        di, dj = place(di, dj)
        cell_no += rng.randint(1, 5)
        pins = [_pin(f"u{cell_no}.y", di, dj, diff=round(rng.uniform(0.05, 0.6), 3),
                     cell_m1=round(rng.uniform(0.02, 0.08), 3))]
        sinks = rng.choices((1, 2, 3, 4), weights=(40, 30, 20, 10))[0]
        for k in range(sinks):
            for _ in range(1000):
                angle = rng.uniform(0, 2 * math.pi)
                reach = span * rng.uniform(0.5, 1.0)
                si, sj = round(di + reach * math.cos(angle)), round(dj + reach * math.sin(angle))
                if free_site(si, sj):
                    break
            else:
                continue  # a crowded corner: this net gets one input fewer
            si, sj = place(si, sj)
            cell_no += rng.randint(1, 5)
            if rng.random() < 1 / 12:
                gate = {"thick": round(rng.uniform(0.1, 0.5), 4)}
            else:
                gate = {"thin": round(math.exp(rng.uniform(math.log(0.01), math.log(0.12))), 4)}
            pins.append(_pin(f"u{cell_no}.{'abcd'[k]}", si, sj, gate=gate,
                             cell_m1=round(rng.uniform(0.01, 0.05), 3)))
        if len(pins) < 2:
            raise RuntimeError(f"{plan.name}: net {n} has no input")
        nets.append({"name": f"{plan.name}/n{n}", "pins": pins})
    return {"block": plan.name, "process": "lumen-6m", "pitch_dbu": PITCH,
            "size_dbu": [int(plan.size_um * 1000)] * 2, "layer_range": list(LAYER_RANGE),
            "nets": nets}


def block_text(plan: BlockPlan) -> str:
    block = make_block(plan)
    nets = block.pop("nets")
    head = json.dumps(block, separators=(",", ":"))[:-1]
    lines = ",\n".join(json.dumps(n, separators=(",", ":")) for n in nets)  # one net a line
    return head + ',"nets":[\n' + lines + "\n]}\n"


def main() -> None:
    DATA.mkdir(exist_ok=True)
    for plan in PLANS:
        out = DATA / f"{plan.name}.json"
        out.write_text(block_text(plan), encoding="utf-8")
        print(f"wrote {plan.nets} nets to {out}")


if __name__ == "__main__":
    main()
