"""Preregistration-style summaries of checked specs: Markdown, HTML with an inline figure, and an index.

This package builds the texts; ``registry/commands/render.py`` finds the specs and writes the files.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from datetime import datetime
from pathlib import Path

from .. import __version__
from ..checks import CAUTION, SpecReport
from .document import (SITE_FILES, IndexRow, drift_verdict, figure_alt, figure_name, index_markdown, page_stem,
                       summary_markdown)
from .figure import PowerFigure, inline_svg, power_figure
from .htmlpage import insert_figure, markdown_to_html, page
from .numbers import analysable, power_curve
from .provenance import FileFacts, Provenance, file_facts, iso_utc, provenance, render_time

__all__ = ["Summary", "build_summary", "summary_figure", "file_facts", "build_index", "IndexRow", "drift_verdict",
           "render_time", "Provenance", "SITE_FILES", "page_stem"]


@dataclass(frozen=True)
class Summary:
    """The three files of one spec's summary, by file name."""

    spec_id: str
    markdown: str
    html: str
    svg: str
    provenance: Provenance
    #: Further figures by file name (the boundary figure of a group-sequential design).
    figures: dict[str, str] = field(default_factory=dict)

    @property
    def page(self) -> str:
        """The HTML page's file name (``index_spec.html`` for a spec whose id is ``index``: see
        :func:`~registry.summary.document.page_stem`)."""
        return f"{page_stem(self.spec_id)}.html"

    def files(self) -> dict[str, str]:
        return {f"{page_stem(self.spec_id)}.md": self.markdown, self.page: self.html,
                figure_name(self.spec_id): self.svg, **self.figures}


def summary_figure(report: SpecReport) -> PowerFigure:
    """The power-curve figure of one valid, sized spec: power against analysable n with the required
    and planned n marked."""
    spec, sample = report.spec, report.sample
    if spec is None or sample is None:
        raise ValueError(f"{report.path}: only a valid spec with a computable sample size can be rendered")
    design = spec.design
    planned = analysable(spec.sample_size.per_group, design.attrition)
    shown_planned = planned if planned >= design.family.min_n else None
    marks = [sample.n_per_group] + ([planned] if shown_planned else [])
    formula = (sample.start_method or design.family.method) if sample.verification is not None else None
    return power_figure(power_curve(design, *marks), target=design.power, required=sample.n_per_group,
                        planned=shown_planned, unit=design.family.unit, figure_id=f"{spec.id}-power",
                        formula=formula)


def build_summary(report: SpecReport, spec_path: Path, rendered_at: datetime, *, index_link: bool = False,
                  facts: FileFacts | None = None) -> Summary:
    """Everything for one valid, sized spec. ``index_link`` adds a link back to ``index.html``;
    ``facts`` is what git says of its file when :func:`~registry.summary.provenance.file_facts` asked
    for many files at once."""
    spec, sample = report.spec, report.sample
    if spec is None or sample is None:
        raise ValueError(f"{report.path}: only a valid spec with a computable sample size can be rendered")
    prov = provenance(report, spec_path, rendered_at, facts)
    markdown = summary_markdown(report, prov)
    figure = summary_figure(report)
    body = insert_figure(markdown_to_html(markdown), figure_name(spec.id), figure_alt(spec.id),
                         inline_svg(figure), figure.description)
    figures: dict[str, str] = {}
    if report.sequential is not None:
        from .sequential import _alt, boundary_figure, boundary_figure_name

        bounds = boundary_figure(report)
        name = boundary_figure_name(spec.id)
        body = insert_figure(body, name, _alt(spec.id), inline_svg(bounds), bounds.description)
        figures[name] = bounds.svg
    nav = '<nav aria-label="Registry"><a href="index.html">All summaries</a></nav>\n' if index_link else ""
    version = prov.registration_tags[-1][0].rsplit("/", 1)[-1] if prov.registration_tags else (
        f"commit {prov.commit[:10]}" if prov.commit else "not committed")
    header = f"{spec.id} · {version} · rendered {iso_utc(rendered_at)[:10]}"
    html = page(title=f"{spec.title} ({spec.id}): design summary", body=body, rendered_at=iso_utc(rendered_at),
                tool_version=__version__, caution=CAUTION, nav=nav, running_header=header)
    return Summary(spec.id, markdown, html, figure.svg, prov, figures)


def build_index(rows: list[IndexRow], rendered_at: datetime) -> tuple[str, str]:
    """Markdown and HTML of the registry index."""
    stamp = iso_utc(rendered_at)
    markdown = index_markdown(rows, stamp, __version__)
    html = page(title="Design registry summaries", body=markdown_to_html(markdown), rendered_at=stamp,
                tool_version=__version__, caution=CAUTION, wide=True, script=True)
    return markdown, html
