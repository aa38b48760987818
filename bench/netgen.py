"""Random but plausible nets for the benchmarks, on the 9-step bench deck.

A generated net looks like what a detail router leaves behind for one signal:

* a driver pin on M1 with diffusion (its output) and a little in-cell M1;
* one gate pin or a few on M1 (input pins: gate area and in-cell M1, no diffusion);
* a tree of straight runs on M1, M2 and M3, each on its layer's preferred direction,
  joined by the deck's default vias (landing pad, cut, landing pad): from the driver
  an M1 stub goes up to an M2 trunk; branches leave a run at some point along it,
  change layer by one via and run on; each gate hangs at the end of a short M1 stub
  that drops from an M2 or M3 run.

Lengths are drawn per layer (short local M1, medium M2, longer M3), in the range of
common practice for signal nets in a small standard-cell block; gate and diffusion
areas are in the range of small logic cells. All values are invented for the bench.

The size parameter is the exact number of routed shapes (pins are not shapes): a
branch costs 4 shapes (a via is 3, the run 1); what is left over is spent on
collinear run extensions (routers often emit one wire as several segments).
"""

from __future__ import annotations

import random
from dataclasses import dataclass
from pathlib import Path

from etchguard import Deck, Pin, Shape, load_deck, run_shapes, via_shapes

BENCH_DECK = Path(__file__).resolve().parents[1] / "service" / "etchguard" / "data" / "lumen-5m.toml"

# Run lengths in DBU (1000 per um on the bench deck), drawn uniformly per layer.
RUN_LENGTH = {"M1": (400, 3_000), "M2": (1_000, 15_000), "M3": (2_000, 30_000)}
GATE_STUB = (300, 1_500)  # M1 from a via down to a gate pin
GATE_AREA_UM2 = (0.01, 0.08)  # per input pin, thin oxide
DRIVER_DIFF_UM2 = (0.05, 0.5)
CELL_M1_UM2 = (0.005, 0.05)
RECENT_WINDOW = 24  # branches mostly leave one of the latest runs: the tree spreads out


@dataclass(frozen=True)
class Run:
    """A straight run's centre line, as the generator placed it."""

    layer: int
    x1: int
    y1: int
    x2: int
    y2: int


@dataclass(frozen=True)
class GeneratedNet:
    name: str
    pins: tuple[Pin, ...]
    shapes: tuple[Shape, ...]
    runs: tuple[Run, ...]

    def as_json(self, deck: Deck) -> dict[str, object]:
        """The net in the contract's net-file JSON form (for the reference checks)."""
        names = [layer.name for layer in deck.layers]
        return {
            "name": self.name,
            "pins": [{"name": p.name, "layer": names[p.layer], "rects": [list(r) for r in p.rects],
                      "gate_area": dict(p.gate_area), "diff_area": p.diff_area,
                      "cell_area": {names[s]: a for s, a in p.cell_area.items()}}
                     for p in self.pins],
            "shapes": [{"layer": names[s.layer], "rect": list(s.rect)} for s in self.shapes],
        }


def default_gate_count(shapes: int) -> int:
    """A gate pin or a few on small nets; a fan-out that grows with big nets."""
    return 1 + shapes // 25


class _Builder:
    def __init__(self, deck: Deck, rng: random.Random, name: str) -> None:
        self.deck = deck
        self.rng = rng
        self.name = name
        idx = deck.layer_index
        self.m1, self.v1, self.m2, self.v2, self.m3 = (idx[n] for n in ("M1", "V1", "M2", "V2", "M3"))
        self.metals = (self.m1, self.m2, self.m3)
        self.shapes: list[Shape] = []
        self.runs: list[Run] = []
        self.pins: list[Pin] = []

    def horizontal(self, layer: int) -> bool:
        return self.deck.layers[layer].direction == "horizontal"

    def length(self, layer: int) -> int:
        lo, hi = RUN_LENGTH[self.deck.layers[layer].name]
        return self.rng.randint(lo, hi)

    def add_run(self, layer: int, x: int, y: int, length: int) -> Run:
        sign = self.rng.choice((-1, 1))
        if self.horizontal(layer):
            run = Run(layer, x, y, x + sign * length, y)
        else:
            run = Run(layer, x, y, x, y + sign * length)
        self.shapes += run_shapes(self.deck, layer, run.x1, run.y1, run.x2, run.y2)
        self.runs.append(run)
        return run

    def add_via(self, lower_metal: int, x: int, y: int) -> None:
        self.shapes += via_shapes(self.deck, lower_metal + 1, x, y)

    def point_on(self, run: Run) -> tuple[int, int]:
        t = self.rng.random()
        return (round(run.x1 + t * (run.x2 - run.x1)), round(run.y1 + t * (run.y2 - run.y1)))

    def pick_run(self, layers: tuple[int, ...]) -> Run | None:
        choices = [r for r in self.runs[-RECENT_WINDOW:] if r.layer in layers]
        if not choices or self.rng.random() < 0.2:
            choices = [r for r in self.runs if r.layer in layers]
        return self.rng.choice(choices) if choices else None

    def pin_rect(self, x: int, y: int) -> tuple[int, int, int, int]:
        w = self.deck.layers[self.m1].wire_width or 140
        h = self.rng.randint(3, 6) * w
        return (x - w // 2, y - h // 2, x - w // 2 + w, y - h // 2 + h)

    def add_gate_pin(self, x: int, y: int) -> None:
        k = sum(1 for p in self.pins if p.gate_area)
        self.pins.append(Pin(f"{self.name}.in{k}", self.m1, (self.pin_rect(x, y),),
                             {"thin": round(self.rng.uniform(*GATE_AREA_UM2), 4)}, 0.0,
                             {self.m1: round(self.rng.uniform(*CELL_M1_UM2), 4)}))

    def add_gate_branch(self) -> None:
        """From an M2 (or M3) run: vias down to M1, a short M1 stub, the gate pin
        (4 shapes from M2, 7 from M3: the caller leaves room for 7)."""
        run = self.pick_run((self.m2, self.m3)) or self.pick_run((self.m1,))
        assert run is not None
        x, y = self.point_on(run)
        if run.layer == self.m3:
            self.add_via(self.m2, x, y)
            self.add_via(self.m1, x, y)
        elif run.layer == self.m2:
            self.add_via(self.m1, x, y)
        stub = self.add_run(self.m1, x, y, self.rng.randint(*GATE_STUB))
        self.add_gate_pin(stub.x2, stub.y2)

    def add_branch(self) -> None:
        """From a run: one via up or down, then a run on the new layer."""
        run = self.pick_run(self.metals)
        assert run is not None
        x, y = self.point_on(run)
        level = self.metals.index(run.layer)
        up = level == 0 or (level == 1 and self.rng.random() < 0.5)
        target = self.metals[level + 1] if up else self.metals[level - 1]
        self.add_via(min(run.layer, target), x, y)
        self.add_run(target, x, y, self.length(target))

    def extend(self) -> None:
        """One more segment continuing a run past its far end, on the same layer."""
        run = self.rng.choice(self.runs)
        length = self.length(run.layer)
        dx = (run.x2 > run.x1) - (run.x2 < run.x1)
        dy = (run.y2 > run.y1) - (run.y2 < run.y1)
        if dx == dy == 0:
            dx = 1 if self.horizontal(run.layer) else 0
            dy = 1 - dx
        new = Run(run.layer, run.x2, run.y2, run.x2 + dx * length, run.y2 + dy * length)
        self.shapes += run_shapes(self.deck, new.layer, new.x1, new.y1, new.x2, new.y2)
        self.runs[self.runs.index(run)] = Run(run.layer, run.x1, run.y1, new.x2, new.y2)


def generate_net(deck: Deck, shapes: int, seed: int | str = 0, name: str = "n0",
                 gates: int | None = None, origin: tuple[int, int] = (0, 0)) -> GeneratedNet:
    """A net of exactly ``shapes`` routed shapes (>= 1) on M1..M3 of ``deck``."""
    if shapes < 1:
        raise ValueError("a generated net needs at least one shape")
    rng = random.Random(f"{seed}/{name}/{shapes}")
    b = _Builder(deck, rng, name)
    gates_left = default_gate_count(shapes) if gates is None else gates
    x0, y0 = origin
    driver_rects = [b.pin_rect(x0, y0)]
    if rng.random() < 0.3:  # an L-shaped output pin: two rectangles of one pin
        r = driver_rects[0]
        driver_rects.append((r[0], r[1], r[2] + 2 * (r[2] - r[0]), r[1] + (r[2] - r[0])))
    b.pins.append(Pin(f"{name}.out", b.m1, tuple(driver_rects), {}, round(rng.uniform(*DRIVER_DIFF_UM2), 4),
                      {b.m1: round(rng.uniform(*CELL_M1_UM2), 4)}))
    stub = b.add_run(b.m1, x0, y0, rng.randint(*GATE_STUB))
    if shapes >= 5:  # up to the M2 trunk
        b.add_via(b.m1, stub.x2, stub.y2)
        b.add_run(b.m2, stub.x2, stub.y2, b.length(b.m2))
    while True:
        left = shapes - len(b.shapes)
        branches = left // 4
        if branches == 0:
            break
        if gates_left and rng.random() < gates_left / branches:
            if left < 7 and b.pick_run((b.m2,)) is None:
                b.add_branch()  # no M2 yet and no room for two vias: grow first
                continue
            if left < 7:  # no room for the double via from M3
                run = b.pick_run((b.m2,))
                assert run is not None
                x, y = b.point_on(run)
                b.add_via(b.m1, x, y)
                stub = b.add_run(b.m1, x, y, rng.randint(*GATE_STUB))
                b.add_gate_pin(stub.x2, stub.y2)
            else:
                b.add_gate_branch()
            gates_left -= 1
        else:
            b.add_branch()
    while len(b.shapes) < shapes:
        b.extend()
    # Gates that found no branch (tiny nets) sit at the far ends of M1 runs.
    m1_runs = [r for r in b.runs if r.layer == b.m1]
    for k in range(gates_left):
        run = m1_runs[-1 - k % len(m1_runs)]
        b.add_gate_pin(run.x2, run.y2)
    assert len(b.shapes) == shapes, (len(b.shapes), shapes)
    return GeneratedNet(name, tuple(b.pins), tuple(b.shapes), tuple(b.runs))


def extension_candidates(deck: Deck, net: GeneratedNet, count: int, seed: int | str = 0) -> list[list[Shape]]:
    """Candidate runs a router might try next: each continues an existing run past
    one of its ends, on the same layer, so that it touches the net at one end."""
    rng = random.Random(f"{seed}/{net.name}/candidates")
    out = []
    for _ in range(count):
        run = rng.choice(net.runs)
        lo, hi = RUN_LENGTH[deck.layers[run.layer].name]
        length = rng.randint(lo, hi)
        if rng.random() < 0.5:
            ax, ay, bx, by = run.x1, run.y1, run.x2, run.y2
        else:
            ax, ay, bx, by = run.x2, run.y2, run.x1, run.y1
        dx = (bx > ax) - (bx < ax)
        dy = (by > ay) - (by < ay)
        if dx == dy == 0:
            horizontal = deck.layers[run.layer].direction == "horizontal"
            dx, dy = (1, 0) if horizontal else (0, 1)
        out.append(run_shapes(deck, run.layer, bx, by, bx + dx * length, by + dy * length))
    return out


def via_run_candidates(deck: Deck, net: GeneratedNet, count: int, seed: int | str = 0) -> list[list[Shape]]:
    """Candidates of 4 shapes: a via up from a point on an M1 or M2 run and a run above."""
    rng = random.Random(f"{seed}/{net.name}/via-candidates")
    idx = deck.layer_index
    lower = [r for r in net.runs if r.layer in (idx["M1"], idx["M2"])]
    out = []
    for _ in range(count):
        run = rng.choice(lower)
        t = rng.random()
        x, y = round(run.x1 + t * (run.x2 - run.x1)), round(run.y1 + t * (run.y2 - run.y1))
        upper = run.layer + 2
        lo, hi = RUN_LENGTH[deck.layers[upper].name]
        length = rng.choice((-1, 1)) * rng.randint(lo, hi)
        if deck.layers[upper].direction == "horizontal":
            end = (x + length, y)
        else:
            end = (x, y + length)
        out.append(via_shapes(deck, run.layer + 1, x, y) + run_shapes(deck, upper, x, y, *end))
    return out


def mixed_candidates(deck: Deck, net: GeneratedNet, count: int, seed: int | str = 0) -> list[list[Shape]]:
    """Candidates of 1 to 4 shapes in equal parts, in turn: a run extension (1); the same
    extension emitted as two overlapping segments, as routers often write one wire (2);
    a via alone, up from a point on an M1 or M2 run (3: pad, cut, pad); a via and a run
    above (4)."""
    quarter = -(-count // 4)
    ones = extension_candidates(deck, net, 2 * quarter, seed=seed)
    stacks = via_run_candidates(deck, net, 2 * quarter, seed=seed)
    twos = [_two_segments(c[0]) for c in ones[quarter:]]
    threes = [c[:3] for c in stacks[quarter:]]
    out = [c for group in zip(ones[:quarter], twos, threes, stacks[:quarter]) for c in group]
    return out[:count]


def _two_segments(shape: Shape) -> list[Shape]:
    """One wire as two segments that overlap by the wire's width around its middle."""
    xlo, ylo, xhi, yhi = shape.rect
    if xhi - xlo >= yhi - ylo:
        mid, w = (xlo + xhi) // 2, yhi - ylo
        return [Shape(shape.layer, (xlo, ylo, mid + w, yhi)), Shape(shape.layer, (mid, ylo, xhi, yhi))]
    mid, w = (ylo + yhi) // 2, xhi - xlo
    return [Shape(shape.layer, (xlo, ylo, xhi, mid + w)), Shape(shape.layer, (xlo, mid, xhi, yhi))]


def bench_deck() -> Deck:
    return load_deck(BENCH_DECK)
