"""Group-sequential designs in ``check``: the maximum n, and recorded interim looks against the plan.

A spec with ``design.sequential`` is sized for its maximum n. Each entry of ``interim_looks``
(date, information fraction, observed z, decision) is compared with the registered looks and
with the boundaries recomputed at the information actually reached (the spending-function
approach of Lan & DeMets 1983 allows looks that fall a little off their planned information).
A look that was not planned, one moved by more than :data:`LOOK_TOLERANCE` in information, one
before the start of data collection, a look after a decision to stop, or a crossed boundary
without the matching decision is ``look-off-plan`` (an error), unless an amendment lists
``interim_looks`` or ``design.sequential``.
"""

from __future__ import annotations

import math
from dataclasses import replace
from typing import TYPE_CHECKING, Any

from .power import InfeasibleDesign
from .power.sequential import InvalidSequential, group_sequential
from .power.sequential_size import apply_to_sample, direction, size_sequential

if TYPE_CHECKING:
    from .checks import SpecReport
    from .model import Spec
    from .power.base import DesignBase

__all__ = ["size_for_check", "check_looks", "assurance_for_check", "LOOK_TOLERANCE"]

#: How far (in information fraction) a recorded look may fall from its planned fraction.
LOOK_TOLERANCE = 0.05


#: Assurance (and its power) is that of one analysis at the maximum n, whatever the interim looks.
_SINGLE_ANALYSIS = "computed for a single analysis at this n (a sequential test has a little less)"


def size_for_check(report: "SpecReport", design: "DesignBase") -> bool:
    """Replace the fixed sample size of ``report`` by the maximum n; False if it cannot be computed."""
    try:
        size = size_sequential(design, report.sample)
    except InfeasibleDesign as error:
        report.add("invalid", "error", error.field, error.message, tuple(error.field.split(".")))
        report.sample = None
        return False
    report.sequential = size
    report.sample = apply_to_sample(report.sample, size, design)
    plan = size.plan
    unit = design.family.unit
    looks = ", ".join(str(n) for n in size.look_n_per_group)
    events = f"; events at the looks {', '.join(map(str, size.look_events))}" if size.look_events else ""
    report.add(
        "sequential-design", "info", "design.sequential",
        f"{design.sequential.describe()}: maximum {size.max_n_per_group} analysable {unit} (fixed design "
        f"{size.fixed_n_per_group}, inflation {plan.inflation:.4f}); looks at {looks} {unit}{events}; expected "
        f"{size.expected_n_alternative:.1f} under the alternative ({size.savings('alternative'):.0%} fewer than the "
        f"fixed design) and {size.expected_n_null:.1f} under the null; efficacy boundaries z = "
        f"{', '.join(f'{b:.3f}' for b in plan.efficacy)}", ("design", "sequential"),
    )
    looks_n = size.look_n_per_group
    if any(b <= a for a, b in zip(looks_n, looks_n[1:])):
        report.add("approximate-size", "warning", "design.sequential.looks",
                   f"two looks fall at the same n ({', '.join(map(str, looks_n))} {unit}): with so few units the "
                   "planned information fractions cannot be kept; plan fewer looks", ("design", "sequential", "looks"))
    elif design.test.endswith("-t") and looks_n[0] < 5:
        report.add("approximate-size", "warning", "design.sequential.looks",
                   f"the first look analyses {looks_n[0]} {unit}: the boundaries are derived for a normal statistic "
                   "and a t-test on so few units may not keep the level; simulate the plan or look later",
                   ("design", "sequential", "looks"))
    if design.simulation is not None:
        report.add("method-note", "info", "design.simulation",
                   "design.simulation simulates a single analysis at the planned n, not the sequential test; the "
                   "power it is compared with is the sequential test's, which is a little lower",
                   ("design", "simulation"))
    return True


def _amended(spec: "Spec") -> str | None:
    for amendment in spec.amendments:
        if any(f == "interim_looks" or f.startswith("interim_looks") or f.startswith("design.sequential")
               for f in amendment.fields):
            return str(amendment.date)
    return None


def check_looks(report: "SpecReport", spec: "Spec") -> None:
    """Compare ``spec.interim_looks`` with ``design.sequential`` and add the findings to ``report``."""
    try:
        _check_looks(report, spec)
    except (InfeasibleDesign, InvalidSequential) as error:
        report.add("invalid", "error", "interim_looks",
                   f"the recorded interim looks could not be compared with the plan: {error}", ("interim_looks",))


def _check_looks(report: "SpecReport", spec: "Spec") -> None:
    looks = spec.interim_looks
    if not looks:
        return
    amended = _amended(spec)

    def off_plan(message: str, loc: tuple[Any, ...]) -> None:
        field = ".".join(str(p) for p in loc)
        if amended:
            report.add("look-off-plan", "info", field, f"{message}; documented by the amendment of {amended}", loc)
        else:
            report.add("look-off-plan", "error", field,
                       f"{message}; record an amendment listing interim_looks (what changed, why, who approved)", loc)

    design = spec.design
    seq = design.sequential
    if seq is None:
        off_plan(f"{len(looks)} interim look(s) recorded, but design.sequential plans none: a look at the data "
                 "that the design did not plan changes the type I error", ("interim_looks",))
        return
    planned = list(seq.fractions)
    matched: list[float] = []
    start = spec.data_collection.start
    stopped = None
    for i, look in enumerate(looks):
        loc = ("interim_looks", i)
        if look.date < start:
            off_plan(f"look {i + 1} is dated {look.date}, before data collection started ({start})",
                     loc + ("date",))
        if i and look.date < looks[i - 1].date:
            off_plan(f"look {i + 1} ({look.date}) is dated before look {i} ({looks[i - 1].date})", loc + ("date",))
        if i and look.information_fraction <= looks[i - 1].information_fraction:
            off_plan(f"look {i + 1} is at information {look.information_fraction:g}, not beyond look {i} "
                     f"({looks[i - 1].information_fraction:g})", loc + ("information_fraction",))
            return
        if stopped is not None:
            off_plan(f"look {i + 1} follows the decision {stopped} at look {i}: a stopped study has no further "
                     "looks", loc)
        remaining = planned[len(matched):]
        if not remaining:
            off_plan(f"look {i + 1} at information {look.information_fraction:g} is one more than the "
                     f"{len(planned)} registered ({', '.join(f'{t:.3g}' for t in planned)})", loc)
            return
        target = remaining[0]
        if abs(look.information_fraction - target) > LOOK_TOLERANCE:
            off_plan(f"look {i + 1} is at information {look.information_fraction:g}, but the registered look "
                     f"{len(matched) + 1} is at {target:.3g} (tolerance {LOOK_TOLERANCE:g})",
                     loc + ("information_fraction",))
        matched.append(look.information_fraction)
        bounds = _bounds_at(design, matched, planned)
        if bounds is None:
            continue
        efficacy, futility, two_sided = bounds
        k = len(matched) - 1
        z = look.z * direction(design)
        crossed_eff = (abs(look.z) if two_sided else z) >= efficacy[k]
        crossed_fut = futility[k] != -math.inf and z <= futility[k] and not crossed_eff
        sign = direction(design)
        rule = (f"|z| >= {efficacy[k]:.3f}" if two_sided
                else f"z >= {efficacy[k]:.3f}" if sign > 0 else f"z <= {-efficacy[k]:.3f}")
        fut_rule = "" if futility[k] == -math.inf else (
            f", futility boundary z {'<=' if sign > 0 else '>='} {sign * futility[k]:.3f}")
        where = (f"look {i + 1} (information {look.information_fraction:g}, z = {look.z:g}; efficacy boundary "
                 f"{rule}{fut_rule})")
        if look.decision == "continue" and crossed_eff:
            off_plan(f"{where} crossed the efficacy boundary, but the study went on without a recorded decision "
                     "to stop", loc + ("decision",))
        elif look.decision == "continue" and crossed_fut:
            if seq.futility == "binding":
                off_plan(f"{where} crossed the binding futility boundary, but the study went on: the efficacy "
                         "boundaries assume it stops", loc + ("decision",))
            else:
                report.add("look-continued", "info", ".".join(map(str, loc)) + ".decision",
                           f"{where} crossed the non-binding futility boundary and the study went on; the type I "
                           "error still holds", loc + ("decision",))
        elif look.decision == "stop-efficacy" and not crossed_eff:
            off_plan(f"{where}: stopped for efficacy without crossing the efficacy boundary", loc + ("decision",))
        elif look.decision == "stop-futility" and not crossed_fut and futility[k] != -math.inf:
            report.add("look-decision", "info", ".".join(map(str, loc)) + ".decision",
                       f"{where}: stopped for futility above the futility boundary (allowed; it lowers power only)",
                       loc + ("decision",))
        if look.decision != "continue":
            stopped = look.decision


def _bounds_at(design: "DesignBase", reached: list[float], planned: list[float]):
    """Efficacy and futility z boundaries with the reached fractions in place of the planned ones."""
    seq = design.sequential
    later = [t for t in planned[len(reached):] if t > reached[-1] + 1e-3]
    fractions = reached + later
    fractions[-1] = 1.0  # the last look is the final analysis, wherever its information ended
    tested = design.as_tested()
    two_sided = tested.alternative == "two-sided" and seq.futility == "none"
    alpha = tested.alpha if (tested.alternative != "two-sided" or two_sided) else tested.alpha / 2
    try:
        plan = group_sequential(fractions, alpha, tested.power, two_sided=two_sided, efficacy=seq.efficacy,
                                rho=seq.efficacy_rho, futility=seq.futility, futility_spending=seq.futility_spending,
                                futility_rho=seq.futility_rho)
    except InvalidSequential:
        return None
    return plan.efficacy, plan.futility_bounds, two_sided


def assurance_for_check(report: "SpecReport", spec: "Spec", spec_file: Any = None) -> None:
    """Assurance at the planned analysable n (``design.assurance``), beside the power there.
    ``sd_prior.from_pilot`` reads ``design.pilot`` next to ``spec_file`` (the pilot check reports its problems)."""
    from .power.assurance import design_assurance, with_pilot

    design = spec.design
    prior = design.assurance.sd_prior
    if prior is not None and prior.from_pilot:
        from .pilot import InvalidPilot, PilotMissing, read_pilot

        source = design.pilot
        try:
            summary = read_pilot(spec_file.path.parent / source.file, source.column, source.confidence)
        except (PilotMissing, InvalidPilot, AttributeError):
            return  # the pilot check names what is wrong with the file
        design = with_pilot(design, summary.n, summary.sd)
    planned = math.floor(spec.sample_size.per_group * (1 - design.attrition) + 1e-9)
    n = max(planned, design.family.min_n)
    loc = ("design", "assurance")
    try:
        result = design_assurance(design, n)
    except InfeasibleDesign as error:
        report.add("invalid", "error", error.field, error.message, tuple(error.field.split(".")))
        return
    report.assurance = result
    unit = design.family.unit
    text = (f"assurance {result.assurance:.3f} at the planned {n} analysable {unit} (power {result.power:.3f} at the "
            f"assumed effect and SD); it approaches {result.limit:.3f} as n grows")
    if result.n_for_target is not None:
        from .power import enrolment

        text += (f"; assurance {result.target:g} needs {result.n_for_target} analysable {unit} "
                 f"({enrolment(result.n_for_target, design.attrition)} enrolled)")
    if design.sequential is not None:
        text += f"; {_SINGLE_ANALYSIS}"
    report.add("assurance", "info", "design.assurance", text, loc)


def size_extras(design: "DesignBase", result: Any, n: int | None, fixed: Any = None,
                ) -> tuple[Any, list[tuple[str, str]], dict[str, Any]]:
    """For ``prespec size``: the result with the maximum n (or the sequential power at ``n``), the rows
    to print for the looks and the assurance, and the JSON keys to add. ``fixed`` is the fixed
    design's size when ``n`` is given (the simulation-verified one where the design has one, as in
    ``check``); by default the solver's."""
    from .power import solve_sample_size
    from .power.assurance import design_assurance
    from .power.sequential_size import apply_to_power

    rows: list[tuple[str, str]] = []
    extra: dict[str, Any] = {}
    where = "at the maximum n"
    if design.sequential is not None:
        if fixed is None:
            fixed = solve_sample_size(design) if n is not None else result
        size = size_sequential(design, fixed)
        plan = size.plan
        if n is None:
            result = apply_to_sample(result, size, design)
        else:  # the boundaries are those of the plan; the looks fall at fractions of the given n
            result = apply_to_power(result, size)
            looks = tuple(max(design.family.min_n, math.ceil(t * n - 1e-9)) for t in plan.fractions)
            where = f"at the design's maximum n ({size.max_n_per_group}, not {n})"
            size = replace(size, max_n_per_group=n, look_n_per_group=looks[:-1] + (n,), look_events=None)
        extra["sequential"] = size.to_dict()
        rows.append(("sequential", f"{design.sequential.describe()}; inflation {plan.inflation:.4f} over the fixed "
                                   f"design's {size.fixed_n_per_group}"))
        rows.extend(("look", line) for line in boundary_lines(design, size, where))
        if n is not None:
            rows.append(("note", "the power above is the sequential test's; the detectable effect is that of a "
                                 "single analysis at this n"))
        if n is None:
            rows.append(("expected n", f"{size.expected_n_alternative:.1f} {design.family.unit} under the "
                                       f"alternative ({size.savings('alternative'):.0%} fewer than the fixed "
                                       f"design), {size.expected_n_null:.1f} under the null"))
    if design.assurance is not None:
        got = design_assurance(design, result.n_per_group)
        extra["assurance"] = got.to_dict()
        text = f"{got.assurance:.4f} at this n (limit {got.limit:.3f} as n grows)"
        if got.n_for_target is not None:
            text += f"; assurance {got.target:g} needs {got.n_for_target} {design.family.unit}"
        if design.sequential is not None:
            text += f"; {_SINGLE_ANALYSIS}"
        rows.append(("assurance", text))
    return result, rows, extra


def boundary_lines(design: "DesignBase", size: Any, where: str = "at the maximum n") -> list[str]:
    """One line per look: information, n, the z boundaries (signed as the test reads them) and the
    stopping probabilities of the plan (``where`` says at which n they hold)."""
    plan = size.plan
    sign = direction(design)
    out = []
    for k, t in enumerate(plan.fractions):
        b = plan.efficacy[k]
        eff = f"|z| >= {b:.3f}" if plan.two_sided else (f"z >= {b:.3f}" if sign > 0 else f"z <= {-b:.3f}")
        a = plan.futility_bounds[k]
        fut = ""
        if a != -math.inf and k + 1 < plan.looks:
            fut = f"; futility {'z <= ' if sign > 0 else 'z >= '}{sign * a:.3f}"
        events = f", {size.look_events[k]} events" if size.look_events else ""
        out.append(f"{k + 1}: information {t:.3g}, n {size.look_n_per_group[k]}{events}; efficacy {eff}{fut}; "
                   f"stop probability {where} {plan.stopping('alternative')[k]:.3f} (alternative), "
                   f"{plan.stopping('null')[k]:.4f} (null)")
    return out


def _recorded(snapshot: Any) -> list[Any]:
    """A version's recorded interim looks as plain values (raw values for an invalid version)."""
    spec = snapshot.spec
    if spec is not None:
        return [look.model_dump(mode="json") for look in spec.interim_looks]
    data = snapshot.data
    raw = data.get("interim_looks") if isinstance(data, dict) else None
    return list(raw) if isinstance(raw, list) else []


def looks_rewritten(base: Any, new: Any, commit: Any) -> list[Any]:
    """``look-off-plan`` findings for a commit that changes or removes an interim look already recorded
    in ``base`` (records of what happened are appended, never rewritten), unless an amendment added
    in the same commit lists ``interim_looks``."""
    from .checks import Finding

    old_looks, new_looks = _recorded(base), _recorded(new)
    if not old_looks:
        return []
    before = {repr(a) for a in base.amendments()}
    added = [a for a in new.amendments() if repr(a) not in before]
    if any(isinstance(a.get("fields"), list) and any(isinstance(f, str) and f.startswith("interim_looks")
                                                     for f in a["fields"]) for a in added):
        return []
    out = []
    when = commit.committer_date.date().isoformat()
    for i, old in enumerate(old_looks):
        if i >= len(new_looks):
            what = "removed"
        elif new_looks[i] != old:
            what = "changed"
        else:
            continue
        out.append(Finding(
            "look-off-plan", "error", f"interim_looks.{i}", None,
            f"commit {commit.short} ({when}) {what} interim look {i + 1}, recorded earlier "
            f"(information {old.get('information_fraction') if isinstance(old, dict) else old!r}); a record of an "
            "interim analysis is appended, not rewritten: restore it, or add an amendment listing interim_looks "
            "in the same commit"))
    return out
