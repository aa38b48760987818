"""Keeps the gRPC bench runnable: a quick run (seconds) must print the whole table.
Nothing here is about time; the bench reports ratios, it does not fail on them."""

from __future__ import annotations

import json
import sys
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]
if str(REPO) not in sys.path:
    sys.path.insert(0, str(REPO))

from bench import grpc_bench  # noqa: E402


def test_quick_grpc_bench_prints_the_table(capsys, tmp_path):
    assert grpc_bench.main(["--quick", "--json", str(tmp_path / "rows.json")]) == 0
    out = capsys.readouterr().out
    for method in ("stream score", "unary score", "stream score, no changes", "batch x1024, 1 rect"):
        assert f"\n{method} " in out
    rows = json.loads((tmp_path / "rows.json").read_text())["rows"]
    assert len(rows) == 6 and all(r["p50_us"] > 0 and r["floor_p50_us"] > 0 for r in rows)
