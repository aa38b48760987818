"""A router's conversation with etchguard, in a few lines of Python.

Start a server first (``make serve``, or ``etchguard serve --rules DECK``), then:

    python client_examples/python/route_one_net.py [127.0.0.1:50051]

It opens a net with one gate and one driver, routes a stub from the gate, asks what
three candidate M2 runs would do, keeps the cheapest, scores 1,024 lengths in one
batch, and reads the net's report. Coordinates are DBU; areas um^2.
"""

from __future__ import annotations

import sys

import numpy as np

from etchguard.client import Client, ServiceError, pin, run, runs_to_rects


def main(target: str) -> int:
    with Client(target) as eg:
        deck = eg.deck
        print(f"deck {deck.name}: {', '.join(layer.name for layer in deck.layers)}")
        net = "example.n1"
        try:
            eg.close_net(net)  # from an earlier run of this example
        except ServiceError:
            pass
        eg.open_net(net, [
            pin("u1.a", "M1", [(0, 0, 200, 200)], gate_area={"thin": 0.05}, cell_area={"M1": 0.02}),
            pin("u0.y", "M1", [(40_000, 0, 40_200, 200)], diff_area=0.3),
        ])
        # routed so far: M1 from the gate, a via up to M2
        eg.commit(net, [run("M1", 100, 100, 5_000, 100)] + eg.via("V1", 5_000, 100))

        with eg.session() as s:  # one ordered stream per router thread
            options = {length: [run("M2", 5_000, 100, 5_000, 100 + length)]
                       for length in (10_000, 60_000, 160_000)}
            scores = {length: s.score(net, shapes) for length, shapes in options.items()}
            for length, sc in scores.items():
                print(f"M2 run of {length / 1000:.0f} um: cost {sc.cost:.3g}, worst utilization "
                      f"{sc.worst_change_utilization:.2f}, {'legal' if sc.legal else 'BREAKS A LIMIT'}")
            best = min(scores, key=lambda k: scores[k].cost)
            ids = s.commit(net, options[best])
            print(f"committed the {best / 1000:.0f} um run as shape {ids[0]}")
            room = s.headroom(net, "M2", 5_000, 100 + best // 2)
            print(f"M2 headroom there: {room.length_um:.1f} um more run ({room.binding})")

        # 1,024 lengths of a further M2 extension, in one message each way
        lengths = np.arange(1, 1025) * 200
        top = 100 + best
        rects = runs_to_rects(5_000, top, 5_000, top + lengths, 140)
        batch = eg.score_batch(net, rects, "M2")
        ok = lengths[batch.legal]
        longest = f"{ok.max() / 1000:.1f} um" if len(ok) else "none"
        print(f"batch: {len(batch)} M2 extensions scored; the longest legal one: {longest}")

        report = eg.check(net)
        print(f"net {report.net}: {'legal' if report.legal else 'VIOLATES'}, worst utilization "
              f"{report.worst_utilization:.2f} over {len(report.checks)} checks")
        eg.close_net(net)
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1] if len(sys.argv) > 1 else "127.0.0.1:50051"))
