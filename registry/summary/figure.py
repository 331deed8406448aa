"""The power-curve figure: matplotlib (Agg) to SVG, byte-for-byte reproducible and labelled for screen readers."""

from __future__ import annotations

import html
import io
import re
from dataclasses import dataclass

from .numbers import Curve

__all__ = ["PowerFigure", "power_figure", "inline_svg", "SVG_MARKER"]

#: Comment written into every standalone figure, so a later render knows the file is its own.
SVG_MARKER = "<!-- prespec power curve -->"

_BLUE = "#1f4e8c"
_ORANGE = "#b04a00"
_GREY = "#4d4d4d"
_RC = {
    "svg.hashsalt": "prespec",  # fixed ids inside the SVG, so two renderings are identical
    "svg.fonttype": "none",  # text stays text: the browser draws it with the page's fonts
    "font.family": "sans-serif",
    "font.size": 10,
    "axes.edgecolor": _GREY,
    "axes.labelcolor": "#1a1a1a",
    "xtick.color": _GREY,
    "ytick.color": _GREY,
}


@dataclass(frozen=True)
class PowerFigure:
    """A standalone SVG document and the texts that describe it."""

    svg: str
    title: str
    description: str


def power_figure(curve: Curve, *, target: float, required: int, planned: int | None, unit: str,
                 figure_id: str, formula: str | None = None) -> PowerFigure:
    """Draw power against analysable n with the target power, the required n and the planned n marked.

    ``planned`` is the planned analysable n (None when too few units remain to compute power).
    ``formula`` names the formula the curve comes from when the required n is simulation-verified
    (the curve is then the formula's, not the simulated test's, and the legend and text say so).
    """
    # Imported here, not at module level: only rendering needs matplotlib, and importing it costs
    # every other command start-up time (and writes a font cache). Figure draws without pyplot,
    # so no GUI backend is ever chosen.
    import matplotlib
    from matplotlib.figure import Figure

    label_unit = "n per group" if unit == "per group" else f"n ({unit})"
    with matplotlib.rc_context(_RC):
        fig = Figure(figsize=(6.4, 4.0))
        ax = fig.add_subplot()
        ax.plot(curve.n, curve.power, color=_BLUE, linewidth=2,
                label="power by the formula" if formula is not None else "power")
        ax.axhline(target, color=_GREY, linestyle="--", linewidth=1, label=f"target power {target:g}")
        same = planned == required  # then the two lines alternate dashes, so both stay visible
        ax.axvline(required, color=_BLUE, linestyle=(0, (4, 4)) if same else ":", linewidth=1.8,
                   label=f"required n = {required:,}" + (" (simulation)" if formula is not None else ""))
        if planned is not None:
            at = curve.power[curve.n.index(planned)] if planned in curve.n else None
            ax.axvline(planned, color=_ORANGE, linestyle=(4, (4, 4)) if same else "-.", linewidth=1.8,
                       label=f"planned n = {planned:,} (analysable)" + (", the required n" if same else ""))
            if at is not None:
                ax.plot([planned], [at], marker="o", color=_ORANGE, markersize=6)
        ax.set_xlim(curve.n[0], curve.n[-1])
        ax.set_ylim(0, 1.02)
        ax.set_xlabel(f"Analysable {label_unit}")
        ax.set_ylabel("Power")
        ax.grid(True, color="#d9d9d9", linewidth=0.6)
        ax.spines[["top", "right"]].set_visible(False)
        # Below the axes, never over the lines.
        ax.legend(loc="upper center", bbox_to_anchor=(0.5, -0.2), ncol=2, frameon=False, fontsize=9)
        fig.tight_layout()
        buffer = io.StringIO()
        fig.savefig(buffer, format="svg", metadata={"Date": None})
    title = "Power curve"
    description = _describe(curve, target, required, planned, label_unit, formula)
    svg = _label(buffer.getvalue(), title, description, figure_id)
    return PowerFigure(svg, title, description)


def _describe(curve: Curve, target: float, required: int, planned: int | None, label_unit: str,
              formula: str | None = None) -> str:
    if formula is not None:
        reached = next((n for n, p in zip(curve.n, curve.power) if p >= target), None)
        text = (f"Power by the formula ({formula}) against analysable {label_unit}, from {curve.power[0]:.2f} at "
                f"n = {curve.n[0]} to {curve.power[-1]:.2f} at n = {curve.n[-1]:,}. ")
        if reached is not None:
            text += (f"The formula reaches the target power {target:g} at n = {reached:,}; the simulated test "
                     "reaches it ")
        else:
            text += f"The simulated test reaches the target power {target:g} "
        text += f"first at n = {required:,}, the required n."
        if planned is not None and planned in curve.n:
            text += (f" At the planned analysable n = {planned:,} the formula gives power "
                     f"{curve.power[curve.n.index(planned)]:.3f}.")
        return text
    text = (f"Power against analysable {label_unit}, from {curve.power[0]:.2f} at n = {curve.n[0]} to "
            f"{curve.power[-1]:.2f} at n = {curve.n[-1]:,}. The target power {target:g} is first reached "
            f"at n = {required:,}.")
    if planned is not None and planned in curve.n:
        text += f" The planned analysable n = {planned:,} gives power {curve.power[curve.n.index(planned)]:.3f}."
    return text


def _label(svg: str, title: str, description: str, figure_id: str) -> str:
    """Add role, a <title> and a <desc> to the root element, and make the picture scale with the page."""
    head = re.search(r"<svg\b[^>]*>", svg)
    assert head is not None, "matplotlib wrote no <svg> element"
    tag = head.group(0)
    tag = re.sub(r'\s(width|height)="[^"]*"', "", tag)
    tag = tag[:-1] + (f' role="img" aria-labelledby="{figure_id}-title {figure_id}-desc"'
                      ' preserveAspectRatio="xMidYMid meet">')
    labels = (f'<title id="{figure_id}-title">{html.escape(title)}</title>'
              f'<desc id="{figure_id}-desc">{html.escape(description)}</desc>')
    return svg[: head.start()] + f"{SVG_MARKER}\n" + tag + labels + svg[head.end():]


def inline_svg(figure: PowerFigure) -> str:
    """The SVG element alone, for embedding in an HTML page (no XML declaration or doctype)."""
    start = figure.svg.index("<svg")
    return figure.svg[start:].strip()
