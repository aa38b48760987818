"""The antenna ratio model: partial and cumulative ratios and their limits.

Definitions (the project's contract, ``antenna-model.md``; from memory, the same
partial / cumulative area-ratio model the open LEF standard describes in its antenna
statements, with diffusion-dependent limits as piecewise-linear tables):

* Step *s* is the etch of layer *s*; the structure then holds layers <= s.
* For a component C at step s: ``G`` its gate area (all oxides), ``D`` its diffusion
  area, ``A`` its conductor on layer s: union area plus pins' in-cell area
  (measure "area") or union perimeter x thickness (measure "side").
* With a rule's factors: ``A_eff = max(0, f*A - k_credit*D)``, ``G_eff = G + k_gate*D``,
  ``PAR_s(C) = A_eff / G_eff`` (defined when G > 0).
* ``CAR_s(g) = sum_{t <= s, same kind as s} PAR_t(C_t(g))``: routing steps with routing
  steps, cut with cut (all together when the deck sets ``cumulative_includes_cuts``);
  a step before g's pin exists adds 0; a step without a rule for (measure, oxide)
  adds the plain ``A / G``. A cut step adds 0 to a side-wall sum: a cut has no
  side-wall thickness in the deck.
* Limits: the plain maximum with D = 0, the diode table at D otherwise (the cumulative
  limit uses D of ``C_s(g)``). Utilization = ratio / limit; legal when <= 1 + 1e-9.

``StepModel`` turns a deck into flat per-step lookups so the hot path does no dict
searching over rules.
"""

from __future__ import annotations

from dataclasses import dataclass

from ._rules import CUT, Deck, Rule

TOLERANCE = 1e-9
PARTIAL = "partial"
CUMULATIVE = "cumulative"


@dataclass(frozen=True)
class CheckKey:
    """One checked quantity at one step: (step, measure, kind, oxide) with its rule."""

    step: int
    measure: str
    kind: str
    oxide: str
    rule: Rule


class StepModel:
    """Per-step view of a deck: checks, cumulative groups and term factors."""

    def __init__(self, deck: Deck) -> None:
        self.deck = deck
        n = len(deck.layers)
        self.steps = n
        self.scale_area = 1.0 / (deck.dbu_per_micron * deck.dbu_per_micron)
        self.scale_length = 1.0 / deck.dbu_per_micron
        self.thickness = [l.thickness_um or 0.0 for l in deck.layers]
        self.is_cut = [l.kind == CUT for l in deck.layers]
        # Cumulative sums are kept per group (measure, oxide); each step belongs to a
        # "lane": 0 routing, 1 cut, or 0 for all when cuts add in with metals.
        self.lane = [0 if deck.cumulative_includes_cuts or not c else 1 for c in self.is_cut]
        self.partial_checks: list[list[CheckKey]] = [[] for _ in range(n)]
        self.cumulative_checks: list[list[CheckKey]] = [[] for _ in range(n)]
        for rule in deck.rules:
            if rule.has_partial:
                self.partial_checks[rule.step].append(
                    CheckKey(rule.step, rule.measure, PARTIAL, rule.oxide, rule))
            if rule.has_cumulative:
                self.cumulative_checks[rule.step].append(
                    CheckKey(rule.step, rule.measure, CUMULATIVE, rule.oxide, rule))
        self.groups: list[tuple[str, str]] = sorted(
            {(r.measure, r.oxide) for r in deck.rules if r.has_cumulative})
        self.group_index = {g: i for i, g in enumerate(self.groups)}
        # term_rule[s][gi]: the rule giving step s's factors for group gi, or None (plain).
        self.term_rule: list[list[Rule | None]] = [
            [deck.rule(s, m, ox) for (m, ox) in self.groups] for s in range(n)]
        # Perimeters are kept wherever a side-wall figure can be asked for: at a step
        # with a side rule, and at every routing step once a cumulative side rule
        # exists (steps without a rule add their plain A / G to the sum).
        cumulative_side = any(r.measure == "side" and r.has_cumulative for r in deck.rules)
        self.side_needed = [not self.is_cut[s] and (cumulative_side or any(
            r.measure == "side" and r.step == s for r in deck.rules)) for s in range(n)]

    def conductor(self, step: int, measure: str, area_dbu2: int, cell_um2: float,
                  perimeter_dbu: int) -> float:
        """A of a component on layer ``step``: um^2 (area) or side-wall um^2 (side)."""
        if measure == "area":
            return area_dbu2 * self.scale_area + cell_um2
        if self.is_cut[step]:
            return 0.0
        return perimeter_dbu * self.scale_length * self.thickness[step]

    def term(self, step: int, group: int, area_dbu2: int, cell_um2: float, perimeter_dbu: int,
             gate_um2: float, diff_um2: float) -> float:
        """This step's term of a cumulative sum for one (measure, oxide) group."""
        measure = self.groups[group][0]
        conductor = self.conductor(step, measure, area_dbu2, cell_um2, perimeter_dbu)
        rule = self.term_rule[step][group]
        if rule is None:
            return conductor / gate_um2
        return rule.ratio(conductor, gate_um2, diff_um2)


def utilization(ratio: float, limit: float) -> float:
    if limit <= 0:
        return float("inf") if ratio > 0 else 0.0
    return ratio / limit


def is_legal(util: float) -> bool:
    return util <= 1.0 + TOLERANCE


def conductor_headroom(rule: Rule | None, limit: float, gate_um2: float, diff_um2: float,
                       spent_ratio: float, conductor: float) -> float:
    """How much more conductor (um^2 of the rule's measure) keeps ratio <= limit.

    ``spent_ratio`` is what other steps already contribute (0 for a partial ratio, the
    rest of the cumulative sum otherwise). Solves ``spent + max(0, f*A' - k*D)/G_eff
    <= limit`` for A' and returns ``A' - conductor`` (negative when already over).
    """
    if rule is None:  # a plain A / G term
        return (limit - spent_ratio) * gate_um2 - conductor
    factor = rule.area_factor
    if rule.factor_with_diode_only and diff_um2 <= 0:
        factor = 1.0
    g_eff = gate_um2 + rule.diode_gate_factor * diff_um2
    budget = (limit - spent_ratio) * g_eff
    if budget < 0:
        return budget / factor  # over already by other steps alone
    return (budget + rule.diode_area_credit * diff_um2) / factor - conductor
