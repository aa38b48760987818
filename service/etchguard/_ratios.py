"""The verdict of the antenna ratio model: when a utilization is legal.

The model itself (the antenna model: components per process step, PAR = A_eff / G_eff,
CAR_s = PAR_s + CAR_p along the feeding chain, diode tables and reduction, oxide
classes) is computed by the compiled core (core/src/model.cpp states the formulas,
core/src/whatif.cpp and assess.cpp the evaluation); this module keeps the one figure
Python code compares against: the contract's tolerance.
"""

from __future__ import annotations

TOLERANCE = 1e-9  # the contract: "a tolerance of 1e-9 relative is allowed"


def is_legal(util: float) -> bool:
    return util <= 1.0 + TOLERANCE
