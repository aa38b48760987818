"""The C++ client example against a live server, held to the Python client.

The test builds client_examples/cpp with CMake (in build/cpp-example, reused between
runs; `make cpp-example` uses the same tree), runs ``etchguard_example`` against a
real ``etchguard serve`` on loopback, and replays the same net and the same
candidates through the Python client (``etchguard.client``): every printed figure
must agree (floats within 1e-9 relative, the contract's tolerance; ids, flags and
fields exactly). That includes the repair advice (Advise, unary and as a session op)
for a wide M2 riser that breaks M2's partial area limit. A few figures are also worked
by hand from the contract's definitions (union area; side wall = perimeter x
thickness; the deck's diode table), so the pair cannot agree on a wrong answer there.

The build needs cmake, a C++ compiler and Debian's gRPC/protobuf development
packages (.ci/install-cpp-deps.sh installs them). Without them the test fails saying
what is missing, unless ETCHGUARD_SKIP_CPP=1, when it skips saying why.
"""

from __future__ import annotations

import math
import subprocess
import uuid
from pathlib import Path

import numpy as np
import pytest

from etchguard.client import Client, ServiceError, pb, pin, rect, run, runs_to_rects, via
from grpc_fixtures import start_server
from native_build import CPP_BUILD, CPP_SOURCE

SOURCE = CPP_SOURCE
BUILD = CPP_BUILD
REL_TOL = 1e-9
RUN_TIMEOUT_S = 60

# The demo net and candidates of client_examples/cpp/example.cpp, built with the Python
# client. A change to the example must be mirrored here.
PINS = [pin("u1.a", "M1", [(0, 0, 200, 200)], gate_area={"thin": 0.05}, cell_area={"M1": 0.02}),
        pin("u0.y", "M1", [(20000, 0, 20200, 200)], diff_area=0.3)]
SHORT, LONG = 9000, 200000
# The advised run: (layer, x1, y1, x2, y2) and width of example.cpp's WideRiser().
WIDE_RISER = ("M2", 4900, 100, 4900, 60100)
WIDE_RISER_WIDTH = 400
BLOCKAGE_ID = 4242  # example.cpp's kBlockageId
BATCH_LENGTHS = (2000, 20000, 60000, 140000, 300000)


def riser(length: int) -> list:
    return [run("M2", 4900, 100, 4900, 100 + length)]


def trunk(deck) -> list:
    return [rect("M1", 0, 30, 5000, 170)] + via(deck, "V1", 4900, 100)


@pytest.fixture(scope="module")
def live_server():
    s = start_server(metrics=False)
    yield s
    s.stop()


def parse_figures(stdout: str) -> dict[str, str]:
    """``key value`` lines -> {key: value text} (a key may have no value)."""
    figures: dict[str, str] = {}
    for line in stdout.splitlines():
        key, _, value = line.partition(" ")
        assert key not in figures, f"figure {key} printed twice"
        figures[key] = value
    return figures


def _text(value: object) -> str:
    if isinstance(value, (bool, np.bool_)):
        return "true" if value else "false"
    if isinstance(value, (list, tuple)):
        return " ".join(str(v) for v in value)
    return str(value)


def _score_figures(prefix: str, s) -> dict[str, object]:
    out: dict[str, object] = {
        f"{prefix}.worst_utilization": s.worst_utilization,
        f"{prefix}.worst_change_utilization": s.worst_change_utilization,
        f"{prefix}.legal": s.legal,
        f"{prefix}.breaks_limit": s.breaks_limit,
        f"{prefix}.cost": s.cost,
    }
    for a in s.added_area:
        out[f"{prefix}.added_area.{a.layer}"] = a.area_um2
    out[f"{prefix}.changes"] = len(s.changes)
    return out


def _advice_figures(prefix: str, a) -> dict[str, object]:
    """The figures example.cpp's PrintAdvice prints, read from a Python AdviseReply."""
    out: dict[str, object] = {
        f"{prefix}.legal_as_is": a.legal_as_is,
        f"{prefix}.found": a.found,
        f"{prefix}.width": a.width,
        f"{prefix}.score.worst_utilization": a.score.worst_utilization,
        f"{prefix}.options": len(a.options),
    }
    for i, o in enumerate(a.options):
        out[f"{prefix}.option.{i}.layer"] = o.layer
        out[f"{prefix}.option.{i}.status"] = pb.OptionStatus.Name(o.status)
        out[f"{prefix}.option.{i}.cuts"] = o.cuts
        out[f"{prefix}.option.{i}.worst_utilization"] = o.score.worst_utilization
    out[f"{prefix}.best_option.layer"] = a.options[a.best_option].layer if a.HasField("best_option") else "none"
    out[f"{prefix}.jumper.present"] = a.HasField("jumper")
    if a.HasField("jumper"):
        j = a.jumper
        out[f"{prefix}.jumper.applicable"] = j.applicable
        out[f"{prefix}.jumper.kept_length_dbu"] = j.kept_length_dbu if j.HasField("kept_length_dbu") else "none"
        out[f"{prefix}.jumper.hop_layer"] = j.hop_layer
        out[f"{prefix}.jumper.hop_point"] = (j.hop_point.x, j.hop_point.y) if j.HasField("hop_point") else "none"
        out[f"{prefix}.jumper.limited_by"] = pb.LimitedBy.Name(j.limited_by)
        out[f"{prefix}.jumper.legal"] = j.legal
    out[f"{prefix}.diode.present"] = a.HasField("diode")
    if a.HasField("diode"):
        d = a.diode
        out[f"{prefix}.diode.found"] = d.found
        out[f"{prefix}.diode.gate"] = d.gate
        out[f"{prefix}.diode.diff_area_um2"] = d.diff_area_um2 if d.HasField("diff_area_um2") else "none"
    out[f"{prefix}.exact_scores"] = a.exact_scores
    out[f"{prefix}.explanations"] = len(a.explanation)
    out[f"{prefix}.explanation.0"] = a.explanation[0] if a.explanation else "none"
    out[f"{prefix}.warnings"] = len(a.warnings)
    out[f"{prefix}.warning.0"] = a.warnings[0] if a.warnings else "none"
    return out


def _batch_figures(prefix: str, b) -> dict[str, object]:
    out: dict[str, object] = {f"{prefix}.size": len(b)}
    for i in range(len(b)):
        out[f"{prefix}.{i}.worst_utilization"] = float(b.worst_utilization[i])
        out[f"{prefix}.{i}.worst_change_utilization"] = float(b.worst_change_utilization[i])
        out[f"{prefix}.{i}.legal"] = bool(b.legal[i])
        out[f"{prefix}.{i}.breaks_limit"] = bool(b.breaks_limit[i])
        out[f"{prefix}.{i}.cost"] = float(b.cost[i])
        out[f"{prefix}.{i}.added_area_um2"] = float(b.added_area_um2[i])
    return out


def python_figures(c: Client, net: str) -> dict[str, object]:
    """The example's sequence through the Python client, figures under the same keys."""
    deck = c.deck
    f: dict[str, object] = {"deck.name": deck.name, "deck.layers": len(deck.layers)}
    f["open_net.ids"] = c.open_net(net, PINS)
    with c.session() as s:
        f["stream.commit.ids"] = s.commit(net, trunk(deck))
        f.update(_score_figures("stream.score.short", s.score(net, riser(SHORT))))
        f.update(_score_figures("stream.score.long", s.score(net, riser(LONG))))
        verdict, committed = s.commit_if_legal(net, riser(LONG))
        f.update(_score_figures("stream.commit_if_legal.long", verdict))
        f["stream.commit_if_legal.long.committed"] = len(committed)
        ids = s.commit(net, riser(SHORT))
        f["stream.commit_riser.ids"] = ids
        report = s.check(net)
        f["stream.check.worst_utilization"] = report.worst_utilization
        f["stream.check.legal"] = report.legal
        f["stream.remove.removed"] = s.remove(net, ids)
        f.update(_advice_figures("stream.advise", s.advise(net, *WIDE_RISER, width=WIDE_RISER_WIDTH,
                                                           want=("jumper", "diode"))))
    f.update(_score_figures("unary.score.long", c.score(net, riser(LONG))))
    f.update(_advice_figures("unary.advise", c.advise(net, *WIDE_RISER, width=WIDE_RISER_WIDTH)))
    lengths = np.array(BATCH_LENGTHS, dtype=np.int64)
    singles = runs_to_rects(4900, 100, 4900, 100 + lengths, 140)
    pair = np.vstack([runs_to_rects(4900, 100, 4900, 8100, 140), runs_to_rects(5000, 100, 9000, 100, 140)])
    rects = np.vstack([singles, pair])
    layers = ["M2"] * len(BATCH_LENGTHS) + ["M2", "M1"]
    counts = [1] * len(BATCH_LENGTHS) + [2]
    f.update(_batch_figures("batch", c.score_batch(net, rects, layers, counts)))
    # example.cpp's SharedBatch, sent whole here: the riser part is prepended by hand
    part = runs_to_rects(4900, 100, 4900, 8100, 140)
    whole = np.vstack([part, runs_to_rects(5000, 100, 9000, 100, 140), part,
                       runs_to_rects(4900, 8100, 4900, 20100, 140), runs_to_rects(4900, 100, 4900, 2100, 140)])
    f.update(_batch_figures("shared", c.score_batch(net, whole, ["M2", "M1", "M2", "M2", "M2"], [2, 2, 1])))
    with pytest.raises(ServiceError) as refused:
        c.score(net, [run("M9", 0, 0, 1000, 0)])
    f["refusal.code"] = refused.value.code.value[0]
    f["refusal.field"] = refused.value.field
    keep_out = rect("M3", 0, 5000000, 1000, 5001000)
    f["blockage.id"] = c.declare_blockage(keep_out, blockage_id=BLOCKAGE_ID)
    with pytest.raises(ServiceError) as held:
        c.declare_blockage(keep_out, blockage_id=BLOCKAGE_ID)
    f["blockage.again.code"] = held.value.code.value[0]
    f["blockage.again.field"] = held.value.field
    c.remove_blockage(BLOCKAGE_ID)
    c.close_net(net)
    f["closed"] = net
    return f


def run_example(binary: Path, address: str, net: str) -> dict[str, str]:
    done = subprocess.run([str(binary), address, net], capture_output=True, text=True, timeout=RUN_TIMEOUT_S)
    assert done.returncode == 0, f"etchguard_example failed ({done.returncode}):\n{done.stderr}"
    return parse_figures(done.stdout)


def test_cpp_example_agrees_with_python_client(example_binary, live_server):
    net = f"blk_a/cpp_{uuid.uuid4().hex[:8]}"
    cpp = run_example(example_binary, live_server.address, net)
    # The example closed its net, so the Python client opens the very same one again.
    with live_server.client() as c:
        expected = python_figures(c, net)

    assert set(cpp) == set(expected), (f"only C++: {sorted(set(cpp) - set(expected))}; "
                                       f"only Python: {sorted(set(expected) - set(cpp))}")
    for key, want in expected.items():
        got = cpp[key]
        if isinstance(want, float):
            assert math.isclose(float(got), want, rel_tol=REL_TOL, abs_tol=0.0) or float(got) == want, \
                f"{key}: C++ {got} vs Python {want!r}"
        else:
            assert got == _text(want), f"{key}: C++ {got!r} vs Python {_text(want)!r}"


def test_cpp_example_figures_worked_by_hand(example_binary, live_server):
    """Figures of the example worked from the contract (the antenna model), not the engine.

    Geometry (DBU, 1000 per um): the V1 via pad on M2 is the 220 square
    [4790, -10, 5010, 210] (cut 140 + 2 x enclosure 40); a riser of length L at the
    default 140 width with 70 extension is [4830, 30, 4970, 100 + L + 70].
    """
    cpp = run_example(example_binary, live_server.address, f"blk_a/hand_{uuid.uuid4().hex[:8]}")
    # Added area = riser area minus its overlap with the pad (union counts overlap once):
    # 140 x 9140 - 140 x 180 = 1,254,400 DBU^2 = 1.2544 um^2.
    assert math.isclose(float(cpp["stream.score.short.added_area.M2"]), (140 * 9140 - 140 * 180) / 1e6,
                        rel_tol=REL_TOL)
    # The long riser (L = 200,000) binds on M2's side-wall partial rule (limit 450, demo
    # deck): perimeter of pad U riser = 880 (pad) - 140 (pad top under the riser)
    # + 2 x (200,170 - 210) (riser sides above the pad) + 140 (riser top) = 400,800 DBU
    # = 400.8 um; side wall 400.8 x 0.14 um (M2 thickness) = 56.112 um^2; over the
    # 0.05 um^2 gate, 1122.24; / 450 = 2.4938666...
    side_util = 400.8 * 0.14 / 0.05 / 450.0
    for prefix in ("stream.score.long", "unary.score.long", "stream.commit_if_legal.long"):
        assert math.isclose(float(cpp[f"{prefix}.worst_utilization"]), side_util, rel_tol=REL_TOL)
        assert cpp[f"{prefix}.legal"] == "false"
        assert cpp[f"{prefix}.breaks_limit"] == "true"
    assert cpp["stream.commit_if_legal.long.committed"] == "0"  # not legal: nothing committed
    # A refusal names the field: candidate 0's layer (M9 is not in the deck);
    # 3 = INVALID_ARGUMENT in google.rpc.Code.
    assert cpp["refusal.code"] == "3"
    assert cpp["refusal.field"] == "candidate[0].layer"
    # The asked blockage id is the one held; asked again, ALREADY_EXISTS (6) names it.
    assert cpp["blockage.id"] == str(BLOCKAGE_ID)
    assert (cpp["blockage.again.code"], cpp["blockage.again.field"]) == ("6", "blockage_id")
    # Advice on the wide riser, run [4700, -100, 5100, 60300] (400 wide, 200 past each
    # end), which covers the whole pad: 400 x 60,400 DBU^2 = 24.16 um^2 of M2 over the
    # 0.05 um^2 gate, a partial area ratio of 483.2 against 400 (its side wall,
    # 121.6 um x 0.14 um / 0.05 = 340.5 of 450, does not bind): 1.208.
    for prefix in ("stream.advise", "unary.advise"):
        assert cpp[f"{prefix}.legal_as_is"] == "false"
        assert math.isclose(float(cpp[f"{prefix}.score.worst_utilization"]), 24.16 / 0.05 / 400.0,
                            rel_tol=REL_TOL)
        # The deck's M2 diode table runs linearly from (0, 400) to (0.2 um^2, 1200), its
        # gate factor and area credit are 0: a limit of 483.2 needs (483.2 - 400) / 4000
        # = 0.0208 um^2 of diffusion.
        assert cpp[f"{prefix}.diode.found"] == "true"
        assert math.isclose(float(cpp[f"{prefix}.diode.diff_area_um2"]), (483.2 - 400.0) / 4000.0,
                            rel_tol=REL_TOL)
    # The session asked for the jumper and the diode only: no hops were proposed.
    assert cpp["stream.advise.options"] == "0"
    assert int(cpp["unary.advise.options"]) > 0


BUDGET_CHECK = BUILD / "etchguard_budget_check"


def _random_box(rng) -> tuple[int, int, int, int]:
    """A rectangle on a 200 DBU grid: random ones touch, abut and overlap often."""
    x, y = rng.randint(0, 10) * 200, rng.randint(0, 10) * 200
    return (x, y, x + rng.randint(1, 5) * 200, y + rng.randint(1, 5) * 200)


def _random_net(rng, names: list[str]) -> tuple[list, list]:
    """A random net on the demo deck: a gate and a driver on M1, shapes on M1 to M3."""
    pins = [pin("g", "M1", [_random_box(rng)], gate_area={"thin": rng.choice([0.01, 0.05, 0.2])}),
            pin("d", "M1", [_random_box(rng)], diff_area=rng.choice([0.05, 0.1]))]
    shapes = [rect(rng.choice(names[:5]), *_random_box(rng)) for _ in range(rng.randint(0, 10))]
    return pins, shapes


def test_cpp_local_budget_equals_service(example_binary, live_server):
    """The C++ LocalBudget (etchguard_budget_check) against the service, on random nets:
    it covers exactly what the Python LocalBudget covers, each covered candidate's
    figures equal the server's score of common + candidate to 1e-9 relative (the
    contract's tolerance), and it declines every candidate that leaves the layer or
    merges another component (decided with networkx in test_budget.extends_only)."""
    import random

    import etchguard as eg
    from etchguard.client import LocalBudget
    from grpc_fixtures import DEMO_DECK
    from test_budget import _extensions, extends_only

    assert BUDGET_CHECK.exists()
    deck = eg.load_deck(DEMO_DECK)
    rng = random.Random(7)
    with live_server.client() as c:
        names = [l.name for l in c.deck.layers]
        lines, expected = [], []
        for k in range(12):
            net = f"blk_b/budget_{uuid.uuid4().hex[:6]}_{k}"
            pins, shapes = _random_net(rng, names)
            c.open_net(net, pins, shapes)
            common = [rect(rng.choice(names[:5]), *_random_box(rng)) for _ in range(rng.randint(0, 3))]
            elements = ([(names.index(p.layer), (p.rects[0].xlo, p.rects[0].ylo, p.rects[0].xhi, p.rects[0].yhi), i)
                         for i, p in enumerate(pins)]
                        + [(names.index(s.layer), (s.rect.xlo, s.rect.ylo, s.rect.xhi, s.rect.yhi), -1)
                           for s in shapes + common])
            hit = rng.randrange(len(elements))
            layer, anchor, _ = elements[hit]
            reply = c.budget(net, names[layer], anchor[0], anchor[1], common)
            local = LocalBudget(reply)
            lines.append(f"budget {net} {names[layer]} {anchor[0]} {anchor[1]}")
            lines += [f"common {s.layer} {s.rect.xlo} {s.rect.ylo} {s.rect.xhi} {s.rect.yhi}" for s in common]
            for ext in _extensions(rng, layer, anchor, len(names)):
                shaped = [(names[l], r) for l, r in ext]
                lines.append("cand " + " ".join(f"{n} {r[0]} {r[1]} {r[2]} {r[3]}" for n, r in shaped))
                truth = extends_only(deck, elements, hit, ext)
                want = c.score(net, common + [rect(n, *r) for n, r in shaped], without_changes=True)
                expected.append((net, shaped, truth, local.evaluate(shaped), want))
        done = subprocess.run([str(BUDGET_CHECK), live_server.address], input="\n".join(lines) + "\n",
                              capture_output=True, text=True, timeout=RUN_TIMEOUT_S)
        assert done.returncode == 0, done.stderr
        out = done.stdout.splitlines()
        assert len(out) == len(expected)
        covered = 0
        for line, (net, shaped, truth, python, want) in zip(out, expected):
            where = (net, shaped, line)
            assert (line != "declined") == (python is not None), where
            if line == "declined":
                continue
            assert truth, ("covered a candidate that merges or leaves the layer", where)
            covered += 1
            _, wc, worst, legal, breaks, cost, added = line.split()
            for got, ref in ((float(wc), want.worst_change_utilization), (float(worst), want.worst_utilization),
                             (float(cost), want.cost), (float(added), sum(a.area_um2 for a in want.added_area))):
                assert got == ref or math.isclose(got, ref, rel_tol=REL_TOL, abs_tol=1e-12), (where, got, ref)
            assert (legal == "1", breaks == "1") == (want.legal, want.breaks_limit), where
        assert covered >= len(expected) // 5, (covered, len(expected))
