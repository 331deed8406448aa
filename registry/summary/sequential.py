"""The summary's group-sequential parts: the boundary table, the recorded looks, assurance, and the
boundary figure (z scale and effect scale)."""

from __future__ import annotations

import io
import math
from typing import Any

from ..checks import SpecReport
from . import mdtext as md
from .figure import _RC, PowerFigure, _label

__all__ = ["staged_markdown", "assurance_markdown", "boundary_figure", "boundary_figure_name"]

_BLUE = "#1f4e8c"
_ORANGE = "#b04a00"
_GREY = "#4d4d4d"


def boundary_figure_name(spec_id: str) -> str:
    return f"{spec_id}-boundaries.svg"


def _alt(spec_id: str) -> str:
    return f"Stopping boundaries of {spec_id}"


def _planned_effect(report: SpecReport) -> tuple[float, str] | None:
    """The planned effect in outcome units (the difference) when the design states one."""
    effect = report.spec.design.effect
    difference = getattr(effect, "difference", None)
    if isinstance(difference, (int, float)) and getattr(effect, "sd", None) is not None:
        unit = report.spec.outcomes.primary.unit if report.spec.outcomes and report.spec.outcomes.primary.unit else ""
        return float(difference), unit
    return None


def _signed(design: Any, value: float) -> float:
    from ..power.sequential_size import direction

    return value * direction(design)


def staged_markdown(report: SpecReport) -> str:
    """The boundary table and the recorded interim looks, appended to the stopping rule."""
    spec = report.spec
    assert spec is not None
    parts: list[str] = []
    size = report.sequential
    design = spec.design
    if size is not None:
        plan = size.plan
        unit = design.family.unit
        natural = _planned_effect(report)
        parts.append(
            f"**Group-sequential design.** {md.inline(design.sequential.describe())}. The maximum is "
            f"{size.max_n_per_group:,} analysable {md.inline(unit)}, {plan.inflation:.4f} times the fixed design's "
            f"{size.fixed_n_per_group:,}; the expected n is {size.expected_n_alternative:.1f} if the planned effect is "
            f"real ({size.savings('alternative'):.0%} fewer than the fixed design) and {size.expected_n_null:.1f} if "
            f"there is no effect. Boundaries computed by recursive numerical integration (Armitage, McPherson & "
            f"Rowe 1969) of the {'two-sided' if plan.two_sided else 'one-sided'} normal-theory statistic; "
            "each look's test is run at the nominal level of its boundary. The minimum detectable effect, the "
            "sensitivity table and the power curve above are those of a single analysis at each n; the required n "
            "marked there is the maximum n.")
        header = ["Look", "Information", f"n ({md.cell(unit)})", "Efficacy z", "Efficacy estimate",
                  "Futility z", "Cumulative alpha", "P(stop), effect", "P(stop), no effect"]
        rows = []
        for k, t in enumerate(plan.fractions):
            eff_ratio, fut_ratio = plan.effect_at(k)
            b = plan.efficacy[k]
            z = f"|z| >= {b:.3f}" if plan.two_sided else f"{_signed(design, b):+.3f}"
            estimate = f"{eff_ratio:.2f} x planned"
            if natural is not None:
                estimate += f" ({eff_ratio * natural[0]:+.3g} {md.cell(natural[1])})".replace(" )", ")")
            a = plan.futility_bounds[k]
            futility = "none" if a == -math.inf or k + 1 == plan.looks else f"{_signed(design, a):+.3f}"
            n = f"{size.look_n_per_group[k]:,}" + (f" ({size.look_events[k]:,} events)" if size.look_events else "")
            rows.append((str(k + 1), f"{t:.3f}", n, z, estimate, futility, f"{plan.alpha_spent[k]:.5f}",
                         f"{plan.stopping('alternative')[k]:.3f}", f"{plan.stopping('null')[k]:.4f}"))
        parts.append(md.table(header, rows, ["r", "r", "r", "r", "r", "r", "r", "r", "r"]))
        parts.append(f"![{md.inline(_alt(spec.id))}]({boundary_figure_name(spec.id)})")
        parts.append(
            "A data-monitoring committee decides whether to stop; the boundaries guide it and do not decide for it. "
            + ("Futility boundaries are binding: the efficacy boundaries are valid only if the study stops when one "
               "is crossed. " if plan.futility == "binding" else "")
            + ("Futility boundaries are non-binding: the type I error holds if the study goes on. "
               if plan.futility == "non-binding" else ""))
    if spec.interim_looks:
        rows = [(str(i + 1), str(look.date), f"{look.information_fraction:.3f}", f"{look.z:+.3f}",
                 md.cell(look.decision), md.cell(look.decided_by or "")) for i, look in enumerate(spec.interim_looks)]
        parts.append("**Interim looks recorded.**\n\n" + md.table(
            ["Look", "Date", "Information", "z", "Decision", "Decided by"], rows, ["r", "l", "r", "r", "l", "l"]))
        off = [f for f in report.findings if f.kind == "look-off-plan"]
        parts.append("**Looks against the plan.** " + (
            "; ".join(md.inline(f.message) for f in off) + "." if off else "Every recorded look matches the plan."))
    return ("\n\n" + "\n\n".join(parts)) if parts else ""


def assurance_markdown(report: SpecReport) -> str:
    """A paragraph on assurance, appended to the required-and-planned table."""
    got = report.assurance
    spec = report.spec
    if got is None or spec is None:
        return ""
    plan = spec.design.assurance
    priors = []
    if plan.effect_prior is not None:
        priors.append(f"a normal prior for the effect with mean {plan.effect_prior.mean:g} and SD "
                      f"{plan.effect_prior.sd:g}")
    if plan.sd_prior is not None:
        priors.append(f"an SD estimated with {plan.sd_prior.df} degrees of freedom (scaled inverse chi-square)")
    text = (f"\n\n**Assurance.** Averaged over {' and '.join(priors)}, the probability of a significant result in "
            f"the planned direction at the planned {got.n_per_group:,} analysable units is {got.assurance:.3f} "
            f"(power at the assumed values: {got.power:.3f}); it cannot exceed {got.limit:.3f} at any n.")
    if got.n_for_target is not None:
        text += f" Assurance {got.target:g} needs {got.n_for_target:,} analysable units."
    return text


def boundary_figure(report: SpecReport) -> PowerFigure:
    """Two panels: the z boundaries against information, and the same on the effect scale."""
    import matplotlib
    from matplotlib.figure import Figure

    size = report.sequential
    spec = report.spec
    plan = size.plan
    design = spec.design
    sign = 1.0 if plan.two_sided else float(_signed(design, 1.0))
    t = list(plan.fractions)
    eff = [sign * b for b in plan.efficacy]
    ratios = [plan.effect_at(k) for k in range(plan.looks)]
    natural = _planned_effect(report)
    scale = natural[0] if natural is not None else 1.0
    eff_est = [r[0] * scale * (1 if natural is not None else sign) for r in ratios]
    has_fut = any(b != -math.inf for b in plan.futility_bounds[:-1])
    with matplotlib.rc_context(_RC):
        fig = Figure(figsize=(6.4, 3.4))
        left, right = fig.subplots(1, 2)
        left.plot(t, eff, marker="o", color=_BLUE, label="efficacy")
        if plan.two_sided:
            left.plot(t, [-b for b in eff], marker="o", color=_BLUE)
        if has_fut:
            fut = [sign * b for b in plan.futility_bounds]
            left.plot(t, fut, marker="s", color=_ORANGE, label="futility")
        left.axhline(0, color=_GREY, linewidth=0.6)
        left.set_xlabel("Information fraction")
        left.set_ylabel("z boundary")
        right.plot(t, eff_est, marker="o", color=_BLUE, label="efficacy")
        if has_fut:
            fut_est = [(r[1] if r[1] is not None else math.nan) * scale * (1 if natural is not None else sign)
                       for r in ratios]
            right.plot(t, fut_est, marker="s", color=_ORANGE, label="futility")
        right.axhline(scale if natural is not None else sign, color=_GREY, linestyle="--", linewidth=1,
                      label="planned effect")
        right.set_xlabel("Information fraction")
        right.set_ylabel(f"estimate at boundary ({natural[1]})" if natural and natural[1] else
                         "estimate at boundary" + ("" if natural else " (x planned)"))
        for ax in (left, right):
            ax.set_xlim(0, 1.02)
            ax.grid(True, color="#d9d9d9", linewidth=0.6)
            ax.spines[["top", "right"]].set_visible(False)
        right.legend(loc="best", fontsize=8, frameon=True, framealpha=0.95, edgecolor="#bfbfbf")
        fig.tight_layout()
        buffer = io.StringIO()
        fig.savefig(buffer, format="svg", metadata={"Date": None})
    title = "Stopping boundaries"
    description = (f"Efficacy boundaries at information {', '.join(f'{x:.2f}' for x in t)}: z = "
                   f"{', '.join(f'{x:.2f}' for x in eff)}"
                   + (f"; futility z = {', '.join(f'{sign * b:.2f}' for b in plan.futility_bounds)}" if has_fut else "")
                   + ". The right panel shows the estimate that would reach each boundary.")
    return PowerFigure(_label(buffer.getvalue(), title, description, f"{spec.id}-boundaries"), title, description)
