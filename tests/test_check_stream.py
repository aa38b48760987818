"""``etchguard check`` streams its net file: a window of the text a few chunks long and
one net are held, never the whole file.

Held to: the same answers and the same refusals (message, file, line, field) with a
window of a few characters, which cuts every value at every place, as with one that
holds the whole file; a peak of Python memory (tracemalloc, standard library) far below
the file's size on a generated file; the first net handed on before the file is read.
"""

from __future__ import annotations

import json
import tracemalloc
from pathlib import Path

import etchguard as eg
import pytest
from etchguard import _textfile, cli
from etchguard._netfile import NetFileReader

DATA = Path(eg.__file__).parent / "data"
DECK = DATA / "lumen-6m.toml"
NETS = DATA / "lumen-demo-nets.json"
WHOLE = 1 << 26  # a window larger than these files: each read at once


def check_output(capsys: pytest.CaptureFixture[str], nets: Path, *extra: str) -> tuple[int, str, str]:
    code = cli.main(["check", "--rules", str(DECK), str(nets), *extra])
    out = capsys.readouterr()
    return code, out.out, out.err


@pytest.mark.parametrize("chunk", [1, 7, 1000])
def test_small_windows_give_the_same_answers(chunk: int, monkeypatch: pytest.MonkeyPatch,
                                             capsys: pytest.CaptureFixture[str]) -> None:
    monkeypatch.setattr(_textfile.TextStream, "CHUNK", WHOLE)
    whole = check_output(capsys, NETS, "--json")
    monkeypatch.setattr(_textfile.TextStream, "CHUNK", chunk)
    assert check_output(capsys, NETS, "--json") == whole
    assert whole[0] == 1 and len(json.loads(whole[1])) == 200


GOOD_NET = ('{"name": "n%d", "pins": [{"name": "u1.a", "layer": "M1", "rects": [[0, 0, 140, 140]],\n'
            ' "gate_area": {"thin": 0.05}}],\n "shapes": [{"layer": "M1", "rect": [0, 0, 3000, 140]}]}')
BROKEN = {
    "a bad byte": b'{"nets": [\n' + GOOD_NET.encode() % 1 + b',\n{"name": "n\xe9"}]}',
    "cut string": ('{"nets": [\n' + GOOD_NET % 1 + ',\n{"name": "n2\n').encode(),
    "deep": ('{"nets": [\n' + GOOD_NET % 1 + ",\n" + "[" * 200 + "]" * 200 + "]}").encode(),
    "long integer": ('{"nets": [\n' + GOOD_NET % 1 + ',\n{"name": "n2", "x": ' + "9" * 5000 + "}]}").encode(),
    "text after": ('{"nets": [\n' + GOOD_NET % 1 + "\n]}\n  x").encode(),
    "twice": ('{"nets": [\n' + GOOD_NET % 1 + ",\n" + GOOD_NET % 1 + "]}").encode(),
    "bad coordinate": ('{"nets": [\n' + GOOD_NET % 1 + ",\n" + (GOOD_NET % 2).replace("3000", "30.5") + "]}").encode(),
    "no end": ('{"nets": [\n' + GOOD_NET % 1).encode(),
    "bom": b"\xef\xbb\xbf" + ('{"nets": [\n' + GOOD_NET % 1 + "]}").encode(),
    "empty": b"  \n ",
}


@pytest.mark.parametrize("case", sorted(BROKEN))
def test_small_windows_give_the_same_refusals(case: str, tmp_path: Path, monkeypatch: pytest.MonkeyPatch,
                                              capsys: pytest.CaptureFixture[str]) -> None:
    nets = tmp_path / "nets.json"
    nets.write_bytes(BROKEN[case])
    monkeypatch.setattr(_textfile.TextStream, "CHUNK", WHOLE)
    whole = check_output(capsys, nets)
    assert whole[0] in ((0, 1) if case == "bom" else (2,)), whole
    for chunk in (1, 3, 16):
        monkeypatch.setattr(_textfile.TextStream, "CHUNK", chunk)
        assert check_output(capsys, nets) == whole, chunk


def write_large(path: Path, nets: int, shapes: int) -> None:
    """A net file of ``nets`` legal nets of ``shapes`` M1 wires each (one gate pin),
    written one net at a time as a pretty-printing tool would."""
    with path.open("w", encoding="utf-8") as out:
        out.write('{"nets": [\n')
        for i in range(nets):
            y = 1000 * i
            net = {"name": f"blk_big/n{i}",
                   "pins": [{"name": f"u{i}.a", "layer": "M1", "rects": [[0, y, 140, y + 140]],
                             "gate_area": {"thin": 0.5}}],
                   "shapes": [{"layer": "M1", "rect": [200 * k, y, 200 * k + 240, y + 140]} for k in range(shapes)]}
            out.write((",\n" if i else "") + json.dumps(net, indent=2))
        out.write("\n]}\n")


def test_peak_memory_is_far_below_the_file(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    nets = tmp_path / "big.json"
    write_large(nets, 5000, 40)
    size = nets.stat().st_size
    assert size > 12_000_000
    cli.main(["check", "--rules", str(DECK), str(NETS), "--progress", "never"])  # imports done before
    capsys.readouterr()
    tracemalloc.start()
    try:
        code = cli.main(["check", "--rules", str(DECK), str(nets), "--progress", "never"])
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    out = capsys.readouterr().out
    assert code == 0 and "5000 nets checked, 0 illegal" in out
    # the window (about two 1 Mi-character chunks) and one net, not the file
    print(f"net file {size / 1e6:.1f} MB, peak traced {peak / 1e6:.1f} MB, ratio {peak / size:.3f}")
    assert peak < size / 3, (peak, size)


def test_the_first_net_comes_before_the_file_is_read(tmp_path: Path) -> None:
    nets = tmp_path / "big.json"
    write_large(nets, 3000, 40)
    reader = NetFileReader(nets)
    first = next(iter(reader.nets()))
    assert first[0] == 0 and first[1]["name"] == "blk_big/n0"
    assert not reader.stream.eof and len(reader.text) < nets.stat().st_size / 3
