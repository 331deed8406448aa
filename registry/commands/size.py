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
import types
import typing
from typing import TYPE_CHECKING, Any, Callable

from ..discovery import UsageError
from ..problems import json_escaped

if TYPE_CHECKING:
    from ..power import EventsOnly, PowerAtN, SampleSize
    from ..power.base import DesignBase
    from ..power.simulate import SimulatedPower

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
                  "pilot", "effect_rationale", "variability_source", "sequential", "assurance"}
_INT_RE = re.compile(r"^[-+]?[0-9]+$")  # ASCII digits only: int() would also read other scripts' digits


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


def _per_group(text: str) -> int:
    from ..power.base import MAX_N

    value = _whole(text)
    if not 1 <= value <= MAX_N:
        raise argparse.ArgumentTypeError(f"must be a whole number from 1 to {MAX_N:,} per group; got {text!r}")
    return value


def _alternative(text: str) -> str:
    from ..power.synonyms import ALTERNATIVE_SYNONYMS, hint

    options = ("two-sided", "greater", "less")
    if text in options:
        return text
    raise argparse.ArgumentTypeError(f"must be two-sided, greater or less; got {text!r}"
                                     f"{hint(text, options, ALTERNATIVE_SYNONYMS)}")


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
    """``NAME=VALUE`` to ``(name, value)``: numbers, true/false, comma lists (``1,2,3``), rows of a
    table separated by ``;`` (``20,22;18,21``), JSON for structured values (``[{"name": "diet",
    "levels": 2}]``) or text.

    >>> parse_param("sd1=4.5"), parse_param("means=10,12,15"), parse_param("method=score")
    (('sd1', 4.5), ('means', [10, 12, 15]), ('method', 'score'))
    >>> parse_param("means=20,22;18,21.5")
    ('means', [[20, 22], [18, 21.5]])
    >>> parse_param('factors=[{"name": "diet", "levels": 2}]')
    ('factors', [{'name': 'diet', 'levels': 2}])
    """
    name, sep, raw = text.partition("=")
    name = name.strip()
    if not sep or not name or not re.match(r"^[A-Za-z_][A-Za-z0-9_.]*$", name):
        raise argparse.ArgumentTypeError(f"expected NAME=VALUE (e.g. sd1=4.5); got {text!r}")
    if not raw.strip():
        raise argparse.ArgumentTypeError(f"{name} has no value; expected NAME=VALUE, e.g. {name}=1.5")
    if raw.lstrip()[:1] in ("[", "{"):
        return name, _structured(name, raw)
    if ";" in raw:
        return name, [[_scalar(part) for part in row.split(",")] for row in raw.split(";")]
    if "," in raw:
        return name, [_scalar(part) for part in raw.split(",")]
    return name, _scalar(raw)


def _structured(name: str | None, raw: str) -> Any:
    """A JSON list or object given on the command line (nested fields such as factorial factors);
    ``name`` is the --param name (None for an option, which argparse names itself)."""
    prefix, example = (f"{name}: ", f"{name}=") if name else ("", "")
    try:
        value = json.loads(raw)
    except ValueError as error:
        raise argparse.ArgumentTypeError(
            f"{prefix}a value starting with {raw.lstrip()[0]!r} is read as JSON, which this is not ({error.msg} at "
            f"character {error.pos + 1}); e.g. {example}'[{{\"name\": \"diet\", \"levels\": 2}}]'") from None
    if not isinstance(value, (list, dict)):
        raise argparse.ArgumentTypeError(f"{prefix}expected a JSON list or object; got {raw!r}")
    return value


def _kind_of(annotation: Any) -> str:
    """How a command-line value for a field of type ``annotation`` is read: list, bool, whole, number or
    text (Literal choices and anything else), from the type itself, not its printed name."""
    origin = typing.get_origin(annotation)
    if origin in (typing.Union, types.UnionType):
        kinds = {_kind_of(arg) for arg in typing.get_args(annotation) if arg is not type(None)}
        return kinds.pop() if len(kinds) == 1 else "text"
    if origin is list:
        return "list"
    if origin is dict:
        return "structured"
    if annotation is bool:
        return "bool"
    if annotation is int:
        return "whole"
    if annotation is float:
        return "number"
    return "text"


def _spec_field_options() -> list[tuple[str, str, str, str]]:
    """(option, parameter name, kind, help) for every effect field of every family and every numeric
    field of the design and its cluster and multiplicity blocks, named as the spec names them
    (``allocation_ratio`` -> ``--allocation-ratio``, ``cluster.icc`` -> ``--cluster-icc``)."""
    from ..power.base import Cluster, DesignBase, Multiplicity
    from ..power.catalog import FAMILIES

    taken = {option for option, *_ in _EFFECT_OPTIONS} | {"--alpha", "--power", "--alternative", "--n",
                                                         "--distribution", "--seed", "--simulate", "--json"}
    fields: dict[str, tuple[str, str, list[str]]] = {}
    for family in FAMILIES:
        for name, info in family.effect_model.model_fields.items():
            kind = _kind_of(info.annotation)
            entry = fields.setdefault(name, (kind, info.description or "", []))
            if entry[0] != kind:  # the same name typed differently by two families: read it as --param does
                entry = fields[name] = ("value", entry[1], entry[2])
            entry[2].append(family.name)
    for name in ("allocation_ratio", "attrition"):
        info = DesignBase.model_fields[name]
        fields[name] = (_kind_of(info.annotation), info.description or "", [])
    for block, model in (("cluster", Cluster), ("multiplicity", Multiplicity)):
        for name, info in model.model_fields.items():
            fields[f"{block}.{name}"] = (_kind_of(info.annotation), info.description or "", [])
    out = []
    # the design's own blocks first: an effect field spelled like one (mixed-design's cluster_size
    # beside cluster.size) is left to --param, so no option means two things
    ordered = sorted(fields.items(), key=lambda item: bool(item[1][2]))
    for name, (kind, description, families) in ordered:
        option = "--" + name.replace("_", "-").replace(".", "-")
        if option in taken:
            continue
        taken.add(option)
        text = description.split(". ")[0].rstrip(".")
        if families and len(families) < 4:
            text += f" ({', '.join(families)})"
        out.append((option, name, kind, text.replace("%", "%%")))
    return out


def _bool(text: str) -> bool:
    lowered = text.strip().lower()
    if lowered in ("true", "yes"):
        return True
    if lowered in ("false", "no"):
        return False
    raise argparse.ArgumentTypeError(f"must be true or false; got {text!r}")


def _list(text: str) -> Any:
    """An option's value read as --param reads it (lists, rows, JSON), with argparse naming the option."""
    if text.lstrip()[:1] in ("[", "{"):
        return _structured(None, text)
    return parse_param(f"value={text}")[1]


def _structured_option(text: str) -> Any:
    return _structured(None, text)


_PARSERS: dict[str, Callable[[str], Any]] = {"number": _number, "whole": _whole, "bool": _bool, "list": _list,
                                              "structured": _structured_option, "value": _list, "text": str}
_METAVARS = {"number": "X", "whole": "N", "bool": "yes|no", "list": "X,Y,...", "structured": "JSON", "value": "VALUE",
             "text": "NAME"}


def add_arguments(parser: argparse.ArgumentParser) -> None:
    from ..power.assumptions import DEFAULT_REPS, DEFAULT_SEED
    from ..power.catalog import family_names

    parser.add_argument("test", metavar="TEST", nargs="?", default=None,
                        help=f"design family, one of: {', '.join(family_names())}")
    effect = parser.add_argument_group("effect (give the ones your design family uses)")
    for option, name, kind, text in _EFFECT_OPTIONS:
        effect.add_argument(option, dest=f"effect_{name}", type=_whole if kind == "whole" else _number,
                            default=None, metavar=name.upper(), help=text)
    fields = parser.add_argument_group("other spec fields (named as in the spec; see docs/spec-format.md)")
    for option, name, kind, text in _spec_field_options():
        aliases = (option, "--ratio") if name == "allocation_ratio" else (option,)
        fields.add_argument(*aliases, dest=f"field_{name}", type=_PARSERS[kind], default=None,
                            metavar=_METAVARS[kind], help=text)
    effect.add_argument("--param", action="append", type=parse_param, default=[], metavar="NAME=VALUE",
                        help="any design or effect field by its spec name, e.g. --param sd1=4 "
                        "--param simulation.baseline_mean=3 (repeatable)")
    design = parser.add_argument_group("design")
    design.add_argument("--alpha", type=_number, default=None, help="significance level (default 0.05)")
    design.add_argument("--power", type=_number, default=None, help="target power (default 0.8)")
    design.add_argument("--alternative", type=_alternative, default=None, metavar="{two-sided,greater,less}",
                        help="direction of the alternative (default two-sided)")
    design.add_argument("--n", type=_per_group, default=None, metavar="N",
                        help="report the power at N analysable units per group and the smallest detectable "
                        "effect there, instead of the sample size")
    seq = parser.add_argument_group("interim looks and assurance (design.sequential, design.assurance)")
    seq.add_argument("--looks", type=_looks, default=None, metavar="K|T1,T2,...",
                     help="analyses including the final one: a number of equally spaced looks, or information "
                     "fractions ending at 1 (e.g. 0.5,0.75,1); n becomes the maximum n")
    seq.add_argument("--spending", default=None, metavar="FUNCTION",
                     help="efficacy spending: obrien-fleming (default), pocock, power (with --param "
                     "sequential.efficacy_rho=R) or haybittle-peto")
    seq.add_argument("--futility", choices=("none", "binding", "non-binding"), default=None,
                     help="futility boundaries (default none)")
    seq.add_argument("--futility-spending", default=None, metavar="FUNCTION",
                     help="type II error spending of the futility boundaries: obrien-fleming (default), pocock, power")
    seq.add_argument("--assurance-mean", type=_number, default=None, metavar="M",
                     help="prior mean of the effect (its units: difference, or d)")
    seq.add_argument("--assurance-sd", type=_number, default=None, metavar="S", help="prior SD of the effect")
    seq.add_argument("--assurance-df", type=_whole, default=None, metavar="DF",
                     help="uncertain SD: degrees of freedom of its estimate (pilot n - 1)")
    seq.add_argument("--assurance-scale", type=_number, default=None, metavar="SD",
                     help="uncertain SD: the pilot SD (default --sd)")
    seq.add_argument("--assurance-target", type=_number, default=None, metavar="A",
                     help="also find the n whose assurance reaches A")
    sim = parser.add_argument_group("simulation")
    sim.add_argument("--simulate", nargs="?", const=str(DEFAULT_REPS), default=None, metavar="REPS",
                     help=f"also estimate the power by simulating REPS experiments (default {DEFAULT_REPS:,})")
    sim.add_argument("--seed", type=_whole, default=None, help=f"seed of the simulation (default {DEFAULT_SEED})")
    sim.add_argument("--distribution", default=None, metavar="SHAPE",
                     help="simulated outcome shape: normal (default), lognormal, counts (needs "
                     "--param baseline_mean=M, the mean of group 1); see docs/simulation.md")
    sim.add_argument("--workers", type=_whole, default=1, metavar="N",
                     help="run a simulation-verified size search in N processes (default 1)")
    parser.add_argument("--json", action="store_true", help="print the result as JSON")


def _simulate_and_test(args: argparse.Namespace) -> tuple[str, int | None]:
    """``--simulate`` takes an optional REPS: a family name after it is the family, not REPS."""
    from ..power.assumptions import DEFAULT_REPS
    from ..power.catalog import family_names

    test, simulate = args.test, args.simulate
    if simulate is not None and not _INT_RE.match(simulate.strip()):
        if test is not None:
            raise UsageError(f"--simulate REPS must be a whole number; got {simulate!r}")
        test, simulate = simulate, str(DEFAULT_REPS)
    if test is None:
        raise UsageError(f"name the design family: prespec size TEST ..., one of {', '.join(family_names())}")
    return test, None if simulate is None else int(simulate)


def run(args: argparse.Namespace) -> int:
    from ..power.assumptions import DEFAULT_REPS, MAX_REPS

    test, simulate = _simulate_and_test(args)
    params: dict[str, Any] = {}
    for _option, name, _kind, _text in _EFFECT_OPTIONS:
        value = getattr(args, f"effect_{name}")
        if value is not None:
            params[name] = value
    for _option, name, _kind, _text in _spec_field_options():
        value = getattr(args, f"field_{name}")
        if value is not None:
            params[name] = value
    for name, value in args.param:
        if name in params or (name == "ratio" and "allocation_ratio" in params):
            raise UsageError(f"{name} is given twice; give it once")
        params[name] = value
    for name in ("alpha", "power", "alternative"):
        value = getattr(args, name)
        if value is not None:
            if name in params:
                raise UsageError(f"{name} is given both as --{name} and as --param; give it once")
            params[name] = value
    _staged_params(args, params)
    if simulate is not None and not 100 <= simulate <= MAX_REPS:
        raise UsageError(f"--simulate REPS must be between 100 and {MAX_REPS:,}; got {simulate}")
    if simulate is None and (args.seed is not None or args.distribution is not None):
        simulate = DEFAULT_REPS  # --seed or --distribution alone ask for a simulation
    if not 1 <= args.workers <= 1024:
        raise UsageError(f"--workers must be between 1 and 1024; got {args.workers}")
    return size(test, params, n=args.n, as_json=args.json, simulate=simulate, seed=args.seed,
                distribution=args.distribution, workers=args.workers)


def _looks(text: str) -> int | list[float]:
    if _INT_RE.match(text.strip()):
        return int(text)
    try:
        return [float(part) for part in text.split(",")]
    except ValueError:
        raise argparse.ArgumentTypeError(f"must be a number of looks or fractions like 0.5,1; got {text!r}") from None


def _staged_params(args: argparse.Namespace, params: dict[str, Any]) -> None:
    """The --looks/--spending/--futility and --assurance-* options as design.sequential / design.assurance."""
    for option, name in (("looks", "looks"), ("spending", "efficacy"), ("futility", "futility"),
                         ("futility_spending", "futility_spending")):
        value = getattr(args, option)
        if value is not None:
            params[f"sequential.{name}"] = value
    if any(f"sequential.{k}" in params for k in ("efficacy", "futility", "futility_spending")) \
            and "sequential.looks" not in params:
        raise UsageError("--spending and --futility need --looks (the number of analyses or their fractions)")
    block: dict[str, Any] = {}
    if args.assurance_mean is not None or args.assurance_sd is not None:
        if args.assurance_mean is None or args.assurance_sd is None:
            raise UsageError("give both --assurance-mean and --assurance-sd (the normal prior of the effect)")
        block["effect_prior"] = {"mean": args.assurance_mean, "sd": args.assurance_sd}
    if args.assurance_df is not None:
        block["sd_prior"] = {"df": args.assurance_df}
        if args.assurance_scale is not None:
            block["sd_prior"]["sd"] = args.assurance_scale
    elif args.assurance_scale is not None:
        raise UsageError("--assurance-scale needs --assurance-df (the degrees of freedom of the SD estimate)")
    if args.assurance_target is not None:
        block["target"] = args.assurance_target
    if block:
        params["assurance"] = block


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
    from ..power import InvalidDesign, UnknownFamily, design_from_params
    from ..power.assumptions import DEFAULT_SEED, SimulationPlan

    simulation_fields = set(SimulationPlan.model_fields) - {"reps", "seed", "distribution"}
    params = _nest(params)
    sim_extra = {key: params.pop(key) for key in list(params) if key in simulation_fields}
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
         simulate: int | None = None, seed: int | None = None, distribution: str | None = None,
         workers: int = 1) -> int:
    """Print the sample size of ``test`` with ``params`` (or the power at ``n``); 0 on success.

    A design whose size is an approximation (:func:`registry.power.verify.needs_verification`) gets
    the simulation-verified n, searched in ``workers`` processes."""
    from ..checks import CAUTION
    from ..power import EventsOnly, InfeasibleDesign, PowerAtN
    from ..power.simulate import InvalidSimulation

    design = _build(test, params, simulate, seed, distribution)
    try:
        result: SampleSize | PowerAtN
        if n is not None:
            result = _power_at_n(design, n, as_json)
        else:
            result = _verified(design, workers, as_json)
    except InvalidSimulation as error:
        raise UsageError(f"cannot simulate this design: {error}") from None
    except EventsOnly as error:
        _print_events(design, error, as_json)
        return 0
    except InfeasibleDesign as error:
        where = f" ({error.field})" if error.field != "design" else ""
        raise UsageError(f"the {test} design has no answer{where}: {error.message}") from None
    staged_rows: list[tuple[str, str]] = []
    staged: dict[str, Any] = {}
    if design.sequential is not None or design.assurance is not None:
        from ..interim import size_extras

        try:
            fixed = _verified(design, workers, as_json) if n is not None and design.sequential is not None else None
            result, staged_rows, staged = size_extras(design, result, n, fixed)
        except InfeasibleDesign as error:
            raise UsageError(f"the {test} design has no answer ({error.field}): {error.message}") from None
    sim = None
    verification = getattr(result, "verification", None)
    if design.simulation is not None and verification is not None:  # the verification ran the spec's simulation
        from ..power.simulate import SimulatedPower

        power = result.power if isinstance(result, PowerAtN) else result.achieved_power
        sim = SimulatedPower(design.test, result.n_per_group, power, verification["standard_error"],
                             verification["reps"], verification["seed"], verification["distribution"])
    elif design.simulation is not None:
        try:
            sim = _simulate(design, result.n_per_group, as_json)
        except InvalidSimulation as error:
            hint = " (on the command line: --param baseline_mean=M)" if "baseline_mean" in str(error) else ""
            raise UsageError(f"cannot simulate this design: {error}{hint}") from None
    if as_json:
        payload = result.to_dict()
        payload["simulation"] = sim.to_dict() if sim else None
        payload.update(staged)
        payload["caution"] = CAUTION
        print(json_escaped(json.dumps(payload, indent=2, ensure_ascii=False)))
    else:
        _print_human(design, result, sim, staged_rows)
    return 0


def _print_events(design: DesignBase, answer: EventsOnly, as_json: bool) -> None:
    """The answer of an event-driven design stated without event information: events only."""
    from ..checks import CAUTION
    from ..power.sequential_size import sequential_events
    from ..report import console

    family = design.family
    looks = sequential_events(design, answer.events)
    if as_json:
        print(json_escaped(json.dumps({"test": family.name, "events": answer.events, "n_per_group": None,
                          "method": family.method, "reference": family.reference, "message": answer.message,
                          "sequential_events": looks, "caution": CAUTION}, indent=2, ensure_ascii=False)))
        return
    out = console()
    out.print(f"Events needed: {family.title} ({family.name})")
    out.print(f"  events     {answer.events:,}{' for a single analysis' if looks else ''}", soft_wrap=True)
    if looks:
        out.print(f"  sequential {looks}", soft_wrap=True)
    out.print(f"  enrolment  not computed: {answer.message}", soft_wrap=True)
    out.print(f"  reference  {family.reference}", soft_wrap=True)
    out.print()
    out.print(f"Note: {CAUTION}", soft_wrap=True)


def _verified(design: DesignBase, workers: int, quiet: bool) -> SampleSize:
    """The simulation-verified size where the design needs one, else the exact or formula size."""
    from ..power import solve_sample_size
    from ..power.verify import needs_verification
    from ..report import console

    if not needs_verification(design):
        return solve_sample_size(design)
    from contextlib import ExitStack

    from ..power.cache import default_cache_dir
    from ..power.verify import verified_sample_size

    with ExitStack() as stack:
        executor = None
        if workers > 1:
            from concurrent.futures import ProcessPoolExecutor

            executor = stack.enter_context(ProcessPoolExecutor(workers))
        progress = None
        if not quiet and sys.stderr.isatty():
            from rich.progress import BarColumn, Progress, TextColumn, TimeElapsedColumn

            bar = stack.enter_context(Progress(TextColumn("verifying the size by simulation"), BarColumn(),
                                               TextColumn("{task.completed:,} experiments"), TimeElapsedColumn(),
                                               console=console(sys.stderr), transient=True))
            task = bar.add_task("verifying", total=None)
            progress = lambda done, total: bar.update(task, completed=done)  # noqa: E731
        return verified_sample_size(design, executor=executor, progress=progress,
                                    cache_dir=default_cache_dir(None))


def _power_at_n(design: DesignBase, n: int, quiet: bool) -> PowerAtN:
    """Power at ``n``: simulated for a design whose size is simulation-verified, else exact or formula."""
    from ..power import power_at
    from ..power.verify import needs_verification

    if not needs_verification(design) or design.family.events_only(design) or design.sequential is not None:
        return power_at(design, n)  # a sequential design's power is its boundaries' (normal theory)
    from ..power.cache import default_cache_dir
    from ..power.verify import verified_power_at
    from ..report import console

    if quiet or not sys.stderr.isatty():
        return verified_power_at(design, n, cache_dir=default_cache_dir(None))
    from rich.progress import BarColumn, Progress, TaskProgressColumn, TextColumn, TimeRemainingColumn

    with Progress(TextColumn("simulating the test"), BarColumn(), TaskProgressColumn(), TimeRemainingColumn(),
                  console=console(sys.stderr), transient=True) as bar:
        task = bar.add_task("simulating", total=None)
        update: Callable[[int, int], None] = lambda done, total: bar.update(task, completed=done, total=total)
        return verified_power_at(design, n, progress=update, cache_dir=default_cache_dir(None))


def _simulate(design: DesignBase, n: int, quiet: bool) -> SimulatedPower:
    from ..power.simulate import chunk_reps, simulated_power
    from ..report import console

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
    unused = design.family.unused_effect_fields(design)
    given = {k: v for k, v in design.effect.model_dump(exclude_none=True).items()
             if k != result.symbol and k not in unused}
    text = f"{result.symbol} = {_g(result.effect_size)}"
    if given:
        # structured fields (factors, profiles of means) in the family's own words, as the summary shows them
        shown = {k: design.family.effect_text(k, getattr(design.effect, k, v)) or _fmt(v) for k, v in given.items()}
        text += " (from " + ", ".join(f"{k} {v}" for k, v in shown.items()) + ")"
    return text


def _fmt(value: Any) -> str:
    if hasattr(value, "model_dump"):  # a nested block (cluster, multiplicity): its fields in words
        value = value.model_dump(exclude_none=True)
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, dict):
        return ", ".join(f"{k.replace('_', ' ')} {_fmt(v)}" for k, v in value.items() if v is not None)
    if isinstance(value, float):
        return _g(value)
    if isinstance(value, (list, tuple)):
        return ", ".join(_fmt(v) for v in value)
    return str(value)


def _assumptions(design: DesignBase, groups: int) -> str:
    parts = [f"alpha {design.alpha:.10g}", design.family.sides(design), f"target power {design.power:.10g}"]
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


def _enrolment(design: DesignBase, result: SampleSize) -> str:
    """The enrolment the solver returned, clusters in words: "110 per group: 11 clusters of 10, ..."."""
    from ..power import enrolment

    why = [f"for {design.attrition:.0%} attrition"] if design.attrition > 0 else []
    if result.clusters_per_group:
        why.append("rounded up to whole clusters")
        enrolled = tuple(c * (result.cluster_size or 1) for c in result.clusters_per_group)
    else:
        enrolled = tuple(enrolment(g, design.attrition) for g in result.group_sizes)
    text = result.enrolment_words() if len(set(enrolled)) == 1 else _sizes(enrolled, result.unit)
    if len(enrolled) > 1 and len(set(enrolled)) == 1:
        text += f" x {len(enrolled)} groups = {sum(enrolled):,} in total"
    return text + (", " + " and ".join(why) if why else "")


def _events(design: DesignBase, result: SampleSize | PowerAtN) -> str:
    """Events, saying how they are rounded and how they relate to the analysable units."""
    from ..power import PowerAtN

    family = design.family
    tested = design.as_tested()
    expected = family.expected_events(tested, result.n_per_group, result.effect_size)
    expected_text = "" if expected is None else (
        f"; the {result.n_total:,} analysable units are expected to give {float(expected):.1f}")
    if isinstance(result, PowerAtN):
        exact = "" if expected is None else f" ({float(expected):.1f} before rounding)"
        return f"{result.events:,} expected from the {result.n_total:,} analysable units{exact}"
    needed = family.required_events(tested, result.effect_size)
    if getattr(result, "verification", None) is not None and expected is not None:
        # the simulation-verified n sets the events: those its analysable units are expected to give
        formula = "" if needed is None else (
            f"; the formula alone asks for {float(needed) * design.design_effect:.1f}, the starting point of the "
            "simulation search")
        return (f"{result.events:,} to observe before the analysis (the {result.n_total:,} analysable units are "
                f"expected to give {float(expected):.1f}, rounded up){formula}")
    exact = "" if needed is None else f" ({float(needed) * design.design_effect:.1f} by the formula, rounded up)"
    return f"{result.events:,} to observe before the analysis{exact}{expected_text}"


def _print_human(design: DesignBase, result: SampleSize | PowerAtN, sim: SimulatedPower | None,
                 staged_rows: list[tuple[str, str]] = ()) -> None:
    from ..checks import CAUTION
    from ..power import SampleSize, enrolment
    from ..power.verify import formula_method
    from ..report import console

    family = design.family
    out = console()
    rows: list[tuple[str, str]] = []
    rows.append(("effect", _effect_line(design, result)))
    rows.append(("assumptions", _assumptions(design, len(result.group_sizes))))
    analysable = _sizes(result.group_sizes, result.unit)
    clusters = result.clusters_per_group if isinstance(result, SampleSize) else None
    if clusters and result.enrolment_total == result.n_total and design.cluster is not None:
        # whole clusters, all analysed (with attrition the enrol line names the clusters to enrol)
        if len(set(clusters)) == 1:
            analysable += f" ({clusters[0]:,} clusters of {design.cluster.size} per group)"
        else:
            analysable += f" ({' + '.join(f'{k:,}' for k in clusters)} clusters of {design.cluster.size})"
    rows.append(("analysable", analysable))
    if isinstance(result, SampleSize) and (result.enrolment_total != result.n_total):
        rows.append(("enrol", _enrolment(design, result)))
    elif design.attrition > 0:  # power at a given n: the n is what remains after attrition
        enrolled = tuple(enrolment(g, design.attrition) for g in result.group_sizes)
        rows.append(("enrol", f"{_sizes(enrolled, result.unit)}, for {design.attrition:.0%} attrition"))
    if result.events is not None:
        rows.append(("events", _events(design, result)))
    if isinstance(result, SampleSize):
        rows.append(("power", f"{result.achieved_power:.4f} ({_label(result)}; the smallest n reaching "
                              f"{result.target_power:g})"))
        if result.start_n is not None:
            rows.append(("start", f"n = {result.start_n:,} {result.unit} by the formula ({result.start_method}), "
                                  "where the search began"))
    elif result.verification is not None:
        mc = result.verification
        rows.append(("power", f"{result.power:.4f} (simulation of the {family.analysis_title(design)}: "
                              f"{mc['reps']:,} simulated experiments, {mc['distribution']} outcome, seed {mc['seed']}, "
                              f"Monte Carlo standard error {mc['standard_error']:.4f})"))
        if result.formula_power is not None:
            rows.append(("formula", f"{result.formula_power:.4f} ({formula_method(design)}; the simulated power "
                                    "is what the test delivers)"))
    else:
        rows.append(("power", f"{result.power:.4f} ({_kind(design)})"))
    if not isinstance(result, SampleSize):
        by_formula = " (by the formula)" if result.verification is not None else ""
        if result.minimum_detectable_effect is None:
            rows.append(("detectable", f"no effect reaches power {result.target_power:g} at this n{by_formula}"))
        else:
            natural = {k: v for k, v in result.minimum_detectable_natural.items() if k != result.symbol}
            extra = (" (" + ", ".join(f"{k} {_g(v)}" for k, v in natural.items()) + ")") if natural else ""
            rows.append(("detectable", f"{result.symbol} = {_g(result.minimum_detectable_effect)}{extra} reaches "
                         f"power {result.target_power:g} at this n{by_formula}"))
    if sim is not None and getattr(result, "verification", None) is None:
        rows.append(("simulated", f"{sim.power:.4f} ± {sim.standard_error:.4f} (SE; {sim.reps:,} simulated "
                     f"experiments, {sim.distribution} outcome, seed {sim.seed})"))
    rows.extend(staged_rows)
    if isinstance(result, SampleSize):
        rows.append(("method", result.method))
    elif result.verification is not None:
        rows.append(("method", f"simulation of the {family.analysis_title(design)} at this n, with the settings of "
                               f"the size search; the formula: {formula_method(design)}"))
    elif design.sequential is not None and design.sequential.count > 1:
        rows.append(("method", f"{_kind(design)}; the detectable effect: {family.method}"))
    else:
        rows.append(("method", family.method))
    rows.append(("reference", family.references(design)))
    for note in result.notes:
        rows.append(("note", note))
    heading = "Sample size" if isinstance(result, SampleSize) else f"Power at n = {result.n_per_group:,}"
    analysed = family.analysis_title(design)
    if analysed[1:2].islower():  # "Two-sample t-test ..." inside the sentence, "ANOVA" as it is
        analysed = analysed[0].lower() + analysed[1:]
    out.print(f"{heading}: {family.title} ({family.name})"
              + (f", analysed by the {analysed}" if analysed.lower() != family.title.lower() else ""))
    width = max(len(label) for label, _ in rows)
    for label, text in rows:
        out.print(f"  {label:<{width}}  {text}", soft_wrap=True)
    out.print()
    out.print(f"Note: {CAUTION}", soft_wrap=True)


def _kind(design: DesignBase) -> str:
    if design.sequential is not None and design.sequential.count > 1:
        return "group-sequential test, boundaries by numerical integration of the normal-theory statistic"
    return design.family.label(design.as_tested())


def _label(result: SampleSize) -> str:
    """The method label of a sample size, with the Monte Carlo facts when it was simulated."""
    sim = result.verification
    if sim is None:
        return result.label
    return (f"{result.label}: {sim['reps']:,} simulated experiments per n, seed {sim['seed']}, Monte Carlo "
            f"standard error {sim['standard_error']:.4f}")
