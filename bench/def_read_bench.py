"""DEF reading speed and memory: a generated block on the demo lumen process.

``python -m bench def_read`` writes a DEF of ``--nets`` nets (rows of LINV cells, each
net a driver and two gates joined by M1 runs, a via stack to M2 and M3 and back down),
then reads it several times with ``etchguard._lefdef.open_design`` (LEF, header, and
every net bound to a NetSpec, none kept) and reports the median MB/s by the wall clock
and by the process's CPU time (the second is the fairer figure on a shared machine); a
further run
under tracemalloc reports the peak Python memory of the streaming read next to the
file size and the memory the header (components) needs. Medians only; nothing fails
on a time.
"""

from __future__ import annotations

import argparse
import statistics
import tempfile
import time
import tracemalloc
from pathlib import Path

DATA = Path(__file__).resolve().parents[1] / "tests" / "data"
LEFS = [DATA / "lumen-tech.lef", DATA / "lumen-cells.lef"]
CELL_W, ROW_H = 1400, 2800


def write_def(path: Path, nets: int, columns: int = 100) -> None:
    """A placed and routed demo block: 3 cells per net in rows, routed on M1-M3."""
    cells = 3 * nets
    rows = (cells + columns - 1) // columns
    with open(path, "w", encoding="utf-8") as out:
        out.write("VERSION 5.8 ;\nDESIGN lumen_bench ;\nUNITS DISTANCE MICRONS 1000 ;\n")
        out.write(f"DIEAREA ( 0 0 ) ( {columns * CELL_W * 2} {rows * ROW_H * 2} ) ;\n")
        out.write(f"COMPONENTS {cells} ;\n")
        for i in range(cells):
            x, y = (i % columns) * CELL_W * 2, (i // columns) * ROW_H * 2
            orient = "N" if (i // columns) % 2 == 0 else "FS"
            out.write(f"- c{i} LINV + PLACED ( {x} {y} ) {orient} ;\n")
        out.write("END COMPONENTS\n")
        out.write(f"NETS {nets} ;\n")
        for n in range(nets):
            a, b, c = 3 * n, 3 * n + 1, 3 * n + 2
            xa, ya = _pin_centre(a, columns, 1100, 1300)  # LINV Y
            xb, yb = _pin_centre(b, columns, 300, 900)  # LINV A
            xc, yc = _pin_centre(c, columns, 300, 900)
            out.write(f"- n{n} ( c{a} Y ) ( c{b} A ) ( c{c} A )\n"
                      f"  + ROUTED M1 ( {xa} {ya} ) ( {xb} * ) ( * {yb} )\n"
                      f"    NEW M1 ( {xb} {yb} ) V1_DEF ( * {yb + 700} ) V2_BAR ( {xc} * ) V2_BAR ( * {yc} )"
                      f" V1_DEF ( {xc} * 0 )\n"
                      f"  + USE SIGNAL ;\n")
        out.write("END NETS\nEND DESIGN\n")


def _pin_centre(cell: int, columns: int, x_local: int, y_local: int) -> tuple[int, int]:
    x, y = (cell % columns) * CELL_W * 2, (cell // columns) * ROW_H * 2
    if (cell // columns) % 2:  # FS: y mirrored inside the row
        return x + x_local, y + ROW_H - y_local
    return x + x_local, y + y_local


def read_all(path: Path) -> int:
    from etchguard._lefdef import open_design

    design = open_design(LEFS, path)
    count = 0
    for _ in design.nets:
        count += 1
    return count


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(prog="python -m bench def_read", description=__doc__)
    parser.add_argument("--nets", type=int, default=60_000)
    parser.add_argument("--rounds", type=int, default=3)
    args = parser.parse_args(argv)
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "lumen_bench.def"
        write_def(path, args.nets)
        size_mb = path.stat().st_size / 1e6
        rates, cpu_rates = [], []
        for _ in range(args.rounds):
            start, cpu = time.perf_counter(), time.process_time()
            count = read_all(path)
            rates.append(size_mb / (time.perf_counter() - start))
            cpu_rates.append(size_mb / (time.process_time() - cpu))
        tracemalloc.start()
        read_all(path)
        _, peak = tracemalloc.get_traced_memory()
        tracemalloc.stop()
        header_path = Path(tmp) / "header_only.def"
        text = path.read_text(encoding="utf-8")
        header_path.write_text(text[:text.index("NETS ")] + "END DESIGN\n", encoding="utf-8")
        tracemalloc.start()
        read_all(header_path)
        _, header_peak = tracemalloc.get_traced_memory()
        tracemalloc.stop()
    print(f"def_read: {count} nets, {size_mb:.1f} MB; median {statistics.median(rates):.2f} MB/s wall, "
          f"{statistics.median(cpu_rates):.2f} MB/s of CPU time, over {args.rounds} rounds "
          f"(wall {', '.join(f'{r:.2f}' for r in rates)})")
    print(f"def_read: Python peak {peak / 1e6:.1f} MB streaming the whole file; "
          f"{header_peak / 1e6:.1f} MB for the same file without its nets (components only)")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
