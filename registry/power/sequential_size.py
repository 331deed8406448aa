"""Maximum n, inflation and expected n of a group-sequential design for a design family.

The boundaries come from :mod:`registry.power.sequential` on the drift scale. The family's own
fixed-design solver gives the analysable n of the fixed design; the maximum n is
``ceil(R x n_fixed)``, with ``R`` the inflation factor (the maximum information over the fixed
design's), and look ``k`` is analysed at ``ceil(t_k x n_max)`` per group. Event-driven designs
(log-rank) inflate the required events the same way. With one look the design is the fixed design.
The t-tests use the boundaries as nominal levels of the t statistic (each look's p-value against
``1 - Phi(b_k)``); the seeded simulations in the tests check the level and power this gives.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from typing import Any

from .base import DesignBase, InfeasibleDesign
from .results import PowerAtN, SampleSize
from .sequential import GroupSequential, InvalidSequential, crossing_probabilities, group_sequential
from .sequential_plan import SEQUENTIAL_FAMILIES
from .solve import enrolment

__all__ = ["SEQUENTIAL_LABEL", "SEQUENTIAL_METHOD", "SequentialSize", "sequential_events", "plan_for",
           "size_sequential", "sequential_power", "direction", "apply_to_sample", "apply_to_power"]

#: How the power of a design with interim looks is obtained (the boundary crossing probabilities).
SEQUENTIAL_LABEL = "normal approximation: boundary crossing of the normal-theory statistic"
SEQUENTIAL_METHOD = "group-sequential test, boundaries by numerical integration of the normal-theory statistic"


@dataclass(frozen=True)
class SequentialSize:
    """A group-sequential design sized for a family: the boundaries and the n at every look."""

    plan: GroupSequential
    fixed_n_per_group: int
    max_n_per_group: int
    max_enrolment_per_group: int
    look_n_per_group: tuple[int, ...]
    expected_n_null: float
    expected_n_alternative: float
    fixed_events: int | None = None
    max_events: int | None = None
    look_events: tuple[int, ...] | None = None
    notes: tuple[str, ...] = field(default_factory=tuple)

    @property
    def inflation(self) -> float:
        return self.plan.inflation

    def savings(self, under: str) -> float:
        """Expected saving of analysable units against the fixed design, as a fraction of it."""
        expected = self.expected_n_null if under == "null" else self.expected_n_alternative
        return 1 - expected / self.fixed_n_per_group

    def to_dict(self) -> dict[str, Any]:
        p = self.plan
        looks = []
        for k, t in enumerate(p.fractions):
            eff, fut = p.effect_at(k)
            looks.append({
                "look": k + 1, "information_fraction": t, "n_per_group": self.look_n_per_group[k],
                **({"events": self.look_events[k]} if self.look_events else {}),
                "efficacy_z": p.efficacy[k],
                "futility_z": None if p.futility_bounds[k] == -math.inf else p.futility_bounds[k],
                "efficacy_effect_ratio": eff, "futility_effect_ratio": fut,
                "alpha_spent": p.alpha_spent[k],
                "stop_probability_null": p.stopping("null")[k],
                "stop_probability_alternative": p.stopping("alternative")[k],
            })
        return {
            "looks": looks, "efficacy": p.efficacy_spending, "efficacy_rho": p.rho, "futility": p.futility,
            "futility_spending": p.futility_spending, "futility_rho": p.futility_rho,
            "two_sided": p.two_sided, "inflation": p.inflation, "fixed_n_per_group": self.fixed_n_per_group,
            "max_n_per_group": self.max_n_per_group, "max_enrolment_per_group": self.max_enrolment_per_group,
            "expected_n_null": self.expected_n_null, "expected_n_alternative": self.expected_n_alternative,
            "fixed_events": self.fixed_events, "max_events": self.max_events,
            "attained_alpha": p.attained_alpha, "power": p.achieved_power, "notes": list(self.notes),
        }


def direction(design: DesignBase) -> int:
    """+1 when large z supports the alternative, -1 when small z does (``less``, or a negative effect)."""
    if design.alternative == "less":
        return -1
    if design.alternative == "greater":
        return 1
    return -1 if design.family.effect_size(design) < 0 else 1


def plan_for(design: DesignBase) -> GroupSequential:
    """The boundaries of ``design.sequential`` at the design's (per-test) alpha and power."""
    seq = design.sequential
    assert seq is not None
    if design.test not in SEQUENTIAL_FAMILIES:
        raise InfeasibleDesign(
            f"design.sequential applies to the families with a normal test statistic "
            f"({', '.join(SEQUENTIAL_FAMILIES)}); {design.test} is not one of them", "design.sequential")
    tested = design.as_tested()
    two_sided = tested.alternative == "two-sided"
    alpha = tested.alpha
    if two_sided and seq.futility != "none":  # futility is one-sided: the test in the effect's direction
        two_sided, alpha = False, alpha / 2
    try:
        return group_sequential(
            seq.fractions, alpha, tested.power, two_sided=two_sided, efficacy=seq.efficacy,
            rho=seq.efficacy_rho, futility=seq.futility, futility_spending=seq.futility_spending,
            futility_rho=seq.futility_rho)
    except InvalidSequential as error:
        raise InfeasibleDesign(error.message, error.field) from None


def size_sequential(design: DesignBase, fixed: SampleSize) -> SequentialSize:
    """Maximum n and expected n of ``design.sequential`` from the fixed design's sample size."""
    plan = plan_for(design)
    ratio = plan.inflation
    n_fixed = fixed.n_per_group
    n_max = n_fixed if plan.looks == 1 else math.ceil(ratio * n_fixed - 1e-9)
    looks = tuple(max(design.family.min_n, math.ceil(t * n_max - 1e-9)) for t in plan.fractions)
    looks = looks[:-1] + (n_max,)
    e0 = float(sum(n * p for n, p in zip(looks, plan.stopping("null"))))
    e1 = float(sum(n * p for n, p in zip(looks, plan.stopping("alternative"))))
    events = max_events = look_events = None
    if fixed.events is not None:
        events = fixed.events
        max_events = events if plan.looks == 1 else math.ceil(ratio * events - 1e-9)
        look_events = tuple(math.ceil(t * max_events - 1e-9) for t in plan.fractions)
    notes = []
    if design.alternative == "two-sided" and design.sequential is not None and design.sequential.futility != "none":
        notes.append("a futility rule is one-sided: boundaries are computed for the test in the direction of the "
                     f"effect at alpha / 2 = {design.as_tested().alpha / 2:g}")
    if design.sequential is not None and design.sequential.futility == "non-binding":
        notes.append("non-binding futility: the type I error holds even if the study continues past a futility "
                     "boundary; power and expected n assume it stops there")
    return SequentialSize(
        plan=plan, fixed_n_per_group=n_fixed, max_n_per_group=n_max,
        max_enrolment_per_group=enrolment(n_max, design.attrition), look_n_per_group=looks,
        expected_n_null=e0, expected_n_alternative=e1, fixed_events=events, max_events=max_events,
        look_events=look_events, notes=tuple(notes),
    )


def sequential_events(design: DesignBase, events: int) -> str | None:
    """For a design known only by its events: the interim looks' maximum and per-look events, as a sentence."""
    if design.sequential is None or design.sequential.count <= 1:
        return None
    plan = plan_for(design)
    most = math.ceil(plan.inflation * events - 1e-9)
    looks = ", ".join(str(math.ceil(t * most - 1e-9)) for t in plan.fractions)
    return (f"with the interim looks ({design.sequential.describe()}) the maximum is {most} events "
            f"(inflation {plan.inflation:.4f} over the fixed design's {events}), analysed at {looks} events")


def sequential_power(size: SequentialSize, n_per_group: int) -> float:
    """Power of the sequential test when the maximum analysable n is ``n_per_group`` (same fractions)."""
    plan = size.plan
    exact_max = plan.inflation * size.fixed_n_per_group
    drift = plan.drift * math.sqrt(n_per_group / exact_max)
    lows = [-b for b in plan.efficacy] if plan.two_sided else list(plan.futility_bounds)
    up, _ = crossing_probabilities(plan.fractions, plan.efficacy, lows, drift)
    return float(up.sum())


def apply_to_sample(sample: SampleSize, size: SequentialSize, design: DesignBase) -> SampleSize:
    """The fixed design's result with the maximum n in its place (what check compares with the plan)."""
    sizes = design.family.group_sizes(design, size.max_n_per_group)
    enrolled = tuple(enrolment(g, design.attrition) for g in sizes)
    sequential = {}
    if size.plan.looks > 1:  # the power is the boundaries' (normal theory), not the fixed design's method
        sequential = dict(label=SEQUENTIAL_LABEL, verification=None, start_n=None, start_method=None,
                          method=f"{SEQUENTIAL_METHOD}; maximum n = inflation x the fixed design's "
                                 f"{size.fixed_n_per_group} ({_fixed_method(sample)})",
                          notes=tuple(f"fixed design: {note}" for note in sample.notes) + size.notes)
    return replace(sample, n_per_group=size.max_n_per_group, n_total=sum(sizes), group_sizes=sizes,
                   enrolment_per_group=enrolled[0], enrolment_total=sum(enrolled),
                   achieved_power=sequential_power(size, size.max_n_per_group),
                   events=size.max_events if size.max_events is not None else sample.events,
                   **{"notes": sample.notes + size.notes, **sequential})


def _fixed_method(sample: SampleSize) -> str:
    """How the fixed design's n was found, with the Monte Carlo facts when it was simulated."""
    sim = sample.verification
    if sim is None:
        return sample.method
    return f"{sample.method}; {sim['reps']:,} simulated experiments per n, seed {sim['seed']}"


def apply_to_power(at: PowerAtN, size: SequentialSize) -> PowerAtN:
    """Power at the planned n of the sequential test instead of the fixed one (normal theory, never
    simulated: a fixed design's simulation facts are dropped)."""
    return replace(at, power=sequential_power(size, at.n_per_group), formula_power=None, verification=None)
