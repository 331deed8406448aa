"""The power-curve figure: matplotlib (Agg) to SVG, byte-for-byte reproducible and labelled for screen readers."""

from __future__ import annotations

import html
import io
import re
import threading
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
    label_unit = "n per group" if unit == "per group" else f"n ({unit})"
    with _CANVAS_LOCK:
        canvas = _canvas()
        svg = canvas.draw(curve, target=target, required=required, planned=planned, label_unit=label_unit,
                          formula=formula)
    title = "Power curve"
    description = _describe(curve, target, required, planned, label_unit, formula)
    return PowerFigure(_label(svg, title, description, figure_id), title, description)


#: Fixed margins (fractions of the figure) that hold the tick labels, the axis labels and the
#: two-row legend below the axes at any n up to six digits. ``tight_layout`` found these for every
#: kind of curve; computing them per figure cost more than drawing it.
_MARGINS = {"left": 0.105, "right": 0.96, "bottom": 0.32, "top": 0.96}


class _Canvas:
    """One figure and its artists, drawn again for every power curve of the process.

    Building a matplotlib figure (axes, ticks, text objects) costs several times what saving it
    does, so the figure is built once and each curve only updates the artists' data, labels and
    limits. The SVG depends on those alone (ids come from ``svg.hashsalt`` and the content), so a
    figure is byte-for-byte the one a fresh figure would give: ``tests/test_render.py`` checks it.
    """

    def __init__(self) -> None:
        # Imported here, not at module level: only rendering needs matplotlib, and importing it costs
        # every other command start-up time (and writes a font cache). Figure draws without pyplot,
        # so no GUI backend is ever chosen.
        import matplotlib
        from matplotlib.figure import Figure

        self._rc = matplotlib.rc_context
        with self._rc(_RC):
            self.figure = Figure(figsize=(6.4, 4.0))
            self.figure.subplots_adjust(**_MARGINS)
            ax = self.axes = self.figure.add_subplot()
            (self.curve,) = ax.plot([], [], color=_BLUE, linewidth=2)
            self.target = ax.axhline(0.0, color=_GREY, linestyle="--", linewidth=1)
            self.required = ax.axvline(0.0, color=_BLUE, linewidth=1.8)
            self.planned = ax.axvline(0.0, color=_ORANGE, linewidth=1.8)
            (self.point,) = ax.plot([], [], marker="o", color=_ORANGE, markersize=6, linestyle="none")
            ax.set_ylim(0, 1.02)
            ax.set_ylabel("Power")
            ax.grid(True, color="#d9d9d9", linewidth=0.6)
            ax.spines[["top", "right"]].set_visible(False)

    def draw(self, curve: Curve, *, target: float, required: int, planned: int | None, label_unit: str,
             formula: str | None) -> str:
        with self._rc(_RC):
            ax = self.axes
            self.curve.set_data(curve.n, curve.power)
            self.curve.set_label("power by the formula" if formula is not None else "power")
            self.target.set_ydata([target, target])
            self.target.set_label(f"target power {target:g}")
            same = planned == required  # then the two lines alternate dashes, so both stay visible
            self.required.set_xdata([required, required])
            self.required.set_linestyle((0, (4, 4)) if same else ":")
            self.required.set_label(f"required n = {required:,}" + (" (simulation)" if formula is not None else ""))
            handles = [self.curve, self.target, self.required]
            self.planned.set_visible(planned is not None)
            self.point.set_visible(False)
            if planned is not None:
                self.planned.set_xdata([planned, planned])
                self.planned.set_linestyle((4, (4, 4)) if same else "-.")
                self.planned.set_label(f"planned n = {planned:,} (analysable)" + (", the required n" if same else ""))
                handles.append(self.planned)
                if planned in curve.n:
                    self.point.set_data([planned], [curve.power[curve.n.index(planned)]])
                    self.point.set_visible(True)
            ax.set_xlim(curve.n[0], curve.n[-1])
            ax.set_xlabel(f"Analysable {label_unit}")
            # Below the axes, never over the lines; a new legend replaces the last curve's.
            ax.legend(handles=handles, loc="upper center", bbox_to_anchor=(0.5, -0.2), ncol=2, frameon=False,
                      fontsize=9)
            buffer = io.StringIO()
            self.figure.savefig(buffer, format="svg", metadata={"Date": None})
        return buffer.getvalue()


_CANVAS: _Canvas | None = None
_CANVAS_LOCK = threading.Lock()  # one drawing at a time: the artists are shared


def _canvas() -> _Canvas:
    global _CANVAS
    if _CANVAS is None:
        _CANVAS = _Canvas()
    return _CANVAS


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
