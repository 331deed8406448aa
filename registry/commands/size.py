"""``prespec size``: the sample size (or the power at a given n) of a design, without a spec.

The named effect options and any ``--param NAME=VALUE`` go straight to
:func:`registry.power.design_from_params`, which routes each name to the design or its effect
block, so a new design family needs no change here.
"""

from __future__ import annotations

import argparse
import json
import math
import re
import sys
from typing import Any, Callable

from ..checks import CAUTION
from ..discovery import UsageError
from ..power import (InfeasibleDesign, InvalidDesign, PowerAtN, SampleSize, UnknownFamily, design_from_params,
                     enrolment, family_names, power_at, solve_sample_size)
from ..power.assumptions import DEFAULT_REPS, DEFAULT_SEED, MAX_REPS, SimulationPlan
from ..power.base import DesignBase
from ..power.simulate import InvalidSimulation, SimulatedPower, chunk_reps, simulated_power
from ..report import console

__all__ = ["size", "parse_param", "HELP", "add_arguments", "run"]

HELP = "compute the sample size of a design, or its power at a given n, from the command line"

#: (option, parameter name, parser, help) of the named effect options; anything else goes via --param.
_EFFECT_OPTIONS: tuple[tuple[str, str, str, str], ...] = (
    ("--d", "d", "number", "standardized mean difference (Cohen's d)"),
    ("--difference", "difference", "number", "difference of means, in outcome units (with --sd)"),
    ("--sd", "sd", "number", "standard deviation of the outcome, in outcome units"),
    ("--f", "f", "number", "Cohen's f (analysis of variance)"),
    ("--groups", "groups", "whole", "number of groups (with --f)"),
    ("--p1", "p1", "number", "proportion in group 1"),
    ("--p2", "p2", "number", "proportion in group 2"),
    ("--r", "r", "number", "correlation coefficient"),
    ("--w", "w", "number", "Cohen's w (chi-square tests)"),
    ("--df", "df", "whole", "degrees of freedom (with --w)"),
    ("--f2", "f2", "number", "Cohen's f-squared (regression)"),
    ("--predictors", "predictors", "whole", "number of tested predictors (with --f2)"),
    ("--hr", "hr", "number", "hazard ratio"),
)
_DESIGN_LABELS = {"alpha", "power", "alternative", "allocation_ratio", "attrition", "test", "effect", "simulation",
                  "pilot", "effect_rationale", "variability_source"}
_SIMULATION_FIELDS = set(SimulationPlan.model_fields) - {"reps", "seed", "distribution"}
_INT_RE = re.compile(r"^[-+]?\d+$")


def _number(text: str) -> float:
    try:
        value = float(text)
    except ValueError:
        hint = f"; write {float(text[:-1]) / 100:g} for {text}" if _is_percent(text) else ""
        raise argparse.ArgumentTypeError(f"must be a number; got {text!r}{hint}") from None
    if not math.isfinite(value):
        raise argparse.ArgumentTypeError(f"must be a finite number; got {text!r}")
    return value


def _is_percent(text: str) -> bool:
    try:
        float(text[:-1])
    except ValueError:
        return False
    return text.endswith("%")


def _whole(text: str) -> int:
    if not _INT_RE.match(text.strip()):
        raise argparse.ArgumentTypeError(f"must be a whole number; got {text!r}")
    return int(text)


def _scalar(text: str) -> Any:
    lowered = text.strip().lower()
    if lowered in ("true", "yes"):
        return True
    if lowered in ("false", "no"):
        return False
    if _INT_RE.match(text.strip()):
        return int(text)
    try:
        return float(text)
    except ValueError:
        return text


def parse_param(text: str) -> tuple[str, Any]:
    """``NAME=VALUE`` to ``(name, value)``: numbers, true/false, comma lists (``1,2,3``) or text.

    >>> parse_param("sd1=4.5"), parse_param("means=10,12,15"), parse_param("method=score")
    (('sd1', 4.5), ('means', [10, 12, 15]), ('method', 'score'))
    """
    name, sep, raw = text.partition("=")
    name = name.strip()
    if not sep or not name or not re.match(r"^[A-Za-z_][A-Za-z0-9_.]*$", name):
        raise argparse.ArgumentTypeError(f"expected NAME=VALUE (e.g. sd1=4.5); got {text!r}")
    if not raw.strip():
        raise argparse.ArgumentTypeError(f"{name} has no value; expected NAME=VALUE, e.g. {name}=1.5")
    if "," in raw:
        return name, [_scalar(part) for part in raw.split(",")]
    return name, _scalar(raw)


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("test", metavar="TEST", help=f"design family, one of: {', '.join(family_names())}")
    effect = parser.add_argument_group("effect (give the ones your design family uses)")
    for option, name, kind, text in _EFFECT_OPTIONS:
        effect.add_argument(option, dest=f"effect_{name}", type=_whole if kind == "whole" else _number,
                            default=None, metavar=name.upper(), help=text)
    effect.add_argument("--param", action="append", type=parse_param, default=[], metavar="NAME=VALUE",
                        help="any other design or effect field, e.g. --param sd1=4 --param attrition=0.1 "
                        "(repeatable; see docs/spec-format.md for each family's fields)")
    design = parser.add_argument_group("design")
    design.add_argument("--alpha", type=_number, default=None, help="significance level (default 0.05)")
    design.add_argument("--power", type=_number, default=None, help="target power (default 0.8)")
    design.add_argument("--alternative", choices=("two-sided", "greater", "less"), default=None,
                        help="direction of the alternative (default two-sided)")
    design.add_argument("--ratio", type=_number, default=None, metavar="N2_OVER_N1",
                        help="two-group designs: n2 / n1 (default 1)")
    design.add_argument("--n", type=_whole, default=None, metavar="N",
                        help="report the power at N analysable units per group and the smallest detectable "
                        "effect there, instead of the sample size")
    sim = parser.add_argument_group("simulation")
    sim.add_argument("--simulate", type=_whole, nargs="?", const=DEFAULT_REPS, default=None, metavar="REPS",
                     help=f"also estimate the power by simulating REPS experiments (default {DEFAULT_REPS:,})")
    sim.add_argument("--seed", type=_whole, default=None, help=f"seed of the simulation (default {DEFAULT_SEED})")
    sim.add_argument("--distribution", default=None, metavar="SHAPE",
                     help="simulated outcome shape: normal (default), lognormal, counts (needs "
                     "--param baseline_mean=M, the mean of group 1); see docs/simulation.md")
    parser.add_argument("--json", action="store_true", help="print the result as JSON")


def run(args: argparse.Namespace) -> int:
    params: dict[str, Any] = {}
    for _option, name, _kind, _text in _EFFECT_OPTIONS:
        value = getattr(args, f"effect_{name}")
        if value is not None:
            params[name] = value
    for name, value in args.param:
        if name in params:
            raise UsageError(f"{name} is given twice; give it once")
        params[name] = value
    for name in ("alpha", "power", "alternative", "ratio"):
        value = getattr(args, name)
        if value is not None:
            if name in params:
                raise UsageError(f"{name} is given both as --{name} and as --param; give it once")
            params[name] = value
    simulate = args.simulate
    if simulate is not None and not 100 <= simulate <= MAX_REPS:
        raise UsageError(f"--simulate REPS must be between 100 and {MAX_REPS:,}; got {simulate}")
    if simulate is None and (args.seed is not None or args.distribution is not None):
        simulate = DEFAULT_REPS  # --seed or --distribution alone ask for a simulation
    return size(args.test, params, n=args.n, as_json=args.json, simulate=simulate, seed=args.seed,
                distribution=args.distribution)


def _nest(params: dict[str, Any]) -> dict[str, Any]:
    """``block.field=value`` names into nested blocks; ``effect.`` is the effect block's own name."""
    out: dict[str, Any] = {}
    for name, value in params.items():
        if "." not in name:
            out[name] = value
            continue
        block, _, field = name.partition(".")
        if block == "effect":
            out[field] = value
        else:
            nested = out.setdefault(block, {})
            if not isinstance(nested, dict):
                raise UsageError(f"{block} is given both as a value and as {name}")
            nested[field] = value
    return out


def _build(test: str, params: dict[str, Any], simulate: int | None, seed: int | None,
           distribution: str | None) -> DesignBase:
    params = _nest(params)
    sim_extra = {key: params.pop(key) for key in list(params) if key in _SIMULATION_FIELDS}
    if simulate is not None:
        block = dict(params.pop("simulation", {}) or {})
        block.update(sim_extra)
        block["reps"] = simulate
        block["seed"] = DEFAULT_SEED if seed is None else seed
        block["distribution"] = distribution
        params["simulation"] = block
    elif sim_extra:
        raise UsageError(f"{', '.join(sim_extra)} only matters for a simulation; add --simulate or --distribution")
    try:
        return design_from_params(test, **params)
    except UnknownFamily as error:
        raise UsageError(str(error)) from None
    except InvalidDesign as error:
        lines = "\n".join(f"  - {message}" for message in error.messages)
        raise UsageError(f"invalid {test} design:\n{lines}") from None


def size(test: str, params: dict[str, Any], *, n: int | None = None, as_json: bool = False,
         simulate: int | None = None, seed: int | None = None, distribution: str | None = None) -> int:
    """Print the sample size of ``test`` with ``params`` (or the power at ``n``); 0 on success."""
    design = _build(test, params, simulate, seed, distribution)
    try:
        result: SampleSize | PowerAtN = solve_sample_size(design) if n is None else power_at(design, n)
    except InfeasibleDesign as error:
        where = f" ({error.field})" if error.field != "design" else ""
        raise UsageError(f"the {test} design has no answer{where}: {error.message}") from None
    sim = None
    if design.simulation is not None:
        try:
            sim = _simulate(design, result.n_per_group, as_json)
        except InvalidSimulation as error:
            hint = " (on the command line: --param baseline_mean=M)" if "baseline_mean" in str(error) else ""
            raise UsageError(f"cannot simulate this design: {error}{hint}") from None
    if as_json:
        payload = result.to_dict()
        payload["simulation"] = sim.to_dict() if sim else None
        payload["caution"] = CAUTION
        print(json.dumps(payload, indent=2, ensure_ascii=False))
    else:
        _print_human(design, result, sim)
    return 0


def _simulate(design: DesignBase, n: int, quiet: bool) -> SimulatedPower:
    plan = design.simulation
    assert plan is not None
    long_run = plan.reps / max(1, chunk_reps(design, n)) >= 4 or plan.reps >= 50_000
    if quiet or not long_run or not sys.stderr.isatty():
        return simulated_power(design, n, reps=plan.reps, seed=plan.seed, distribution=plan.distribution)
    from rich.progress import BarColumn, Progress, TaskProgressColumn, TextColumn, TimeRemainingColumn

    with Progress(TextColumn("simulating"), BarColumn(), TaskProgressColumn(), TimeRemainingColumn(),
                  console=console(sys.stderr), transient=True) as bar:
        task = bar.add_task("simulating", total=plan.reps)
        update: Callable[[int, int], None] = lambda done, total: bar.update(task, completed=done)
        return simulated_power(design, n, reps=plan.reps, seed=plan.seed, distribution=plan.distribution,
                               progress=update)


def _g(value: float) -> str:
    return f"{value:.4g}"


def _effect_line(design: DesignBase, result: SampleSize | PowerAtN) -> str:
    given = {k: v for k, v in design.effect.model_dump(exclude_none=True).items() if k != result.symbol}
    text = f"{result.symbol} = {_g(result.effect_size)}"
    if given:
        text += " (from " + ", ".join(f"{k} {_fmt(v)}" for k, v in given.items()) + ")"
    return text


def _fmt(value: Any) -> str:
    if isinstance(value, float):
        return _g(value)
    if isinstance(value, (list, tuple)):
        return ", ".join(_fmt(v) for v in value)
    return str(value)


def _assumptions(design: DesignBase, groups: int) -> str:
    parts = [f"alpha {design.alpha:g}", design.alternative, f"target power {design.power:g}"]
    if groups == 2:
        parts.append(f"allocation n2/n1 = {design.allocation_ratio:g}")
    for name in sorted(design.model_fields_set - _DESIGN_LABELS):
        parts.append(f"{name.replace('_', ' ')} {_fmt(getattr(design, name))}")
    return ", ".join(parts)


def _sizes(sizes: tuple[int, ...], unit: str) -> str:
    total = sum(sizes)
    if len(sizes) == 1:
        return f"{sizes[0]:,} {unit}"
    if len(set(sizes)) == 1:
        return f"{sizes[0]:,} per group x {len(sizes)} groups = {total:,} in total"
    return " + ".join(f"{s:,}" for s in sizes) + f" = {total:,} in total (group 1 + group 2" + \
        (" + ..." if len(sizes) > 2 else "") + ")"


def _print_human(design: DesignBase, result: SampleSize | PowerAtN, sim: SimulatedPower | None) -> None:
    family = design.family
    out = console()
    rows: list[tuple[str, str]] = []
    rows.append(("effect", _effect_line(design, result)))
    rows.append(("assumptions", _assumptions(design, len(result.group_sizes))))
    rows.append(("analysable", _sizes(result.group_sizes, result.unit)))
    if design.attrition > 0:
        enrolled = tuple(enrolment(g, design.attrition) for g in result.group_sizes)
        rows.append(("enrol", f"{_sizes(enrolled, result.unit)}, for {design.attrition:.0%} attrition"))
    if result.events is not None:
        rows.append(("events", f"{result.events:,}"))
    if isinstance(result, SampleSize):
        rows.append(("power", f"{result.achieved_power:.4f} ({_kind(design)}; the smallest n reaching "
                              f"{result.target_power:g})"))
    else:
        rows.append(("power", f"{result.power:.4f} ({_kind(design)})"))
        if result.minimum_detectable_effect is None:
            rows.append(("detectable", f"no effect reaches power {result.target_power:g} at this n"))
        else:
            natural = {k: v for k, v in result.minimum_detectable_natural.items() if k != result.symbol}
            extra = (" (" + ", ".join(f"{k} {_g(v)}" for k, v in natural.items()) + ")") if natural else ""
            rows.append(("detectable", f"{result.symbol} = {_g(result.minimum_detectable_effect)}{extra} reaches "
                         f"power {result.target_power:g} at this n"))
    if sim is not None:
        rows.append(("simulated", f"{sim.power:.4f} ± {sim.standard_error:.4f} (SE; {sim.reps:,} simulated "
                     f"experiments, {sim.distribution} outcome, seed {sim.seed})"))
    rows.append(("method", family.method))
    rows.append(("reference", family.reference))
    for note in result.notes:
        rows.append(("note", note))
    heading = "Sample size" if isinstance(result, SampleSize) else f"Power at n = {result.n_per_group:,}"
    out.print(f"{heading}: {family.title} ({family.name})")
    width = max(len(label) for label, _ in rows)
    for label, text in rows:
        out.print(f"  {label:<{width}}  {text}", soft_wrap=True)
    out.print()
    out.print(f"Note: {CAUTION}", soft_wrap=True)


def _kind(design: DesignBase) -> str:
    return "exact" if design.family.exact else "approximation, see method"
