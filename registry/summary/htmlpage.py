"""Markdown to a standalone HTML page: markdown-it with raw HTML off, our CSS, the figure inlined.

Raw HTML in Markdown is disabled, so whatever a spec says is shown as text. The only
markup that does not come from markdown-it is ours: the page frame and the power-curve
SVG, which replaces the one image reference our template writes.
"""

from __future__ import annotations

import html
import re
from importlib import resources
from string import Template

from markdown_it import MarkdownIt
from markdown_it.rules_core import StateCore

__all__ = ["markdown_to_html", "page", "insert_figure", "CSS", "SITE_SCRIPT", "SITE_SCRIPT_NAME"]


def _table_headers(state: StateCore) -> None:
    for token in state.tokens:
        if token.type == "th_open":
            token.attrSet("scope", "col")


def _parser() -> MarkdownIt:
    parser = MarkdownIt("commonmark", {"html": False}).enable("table")
    parser.core.ruler.push("prespec_table_headers", _table_headers)

    def table_open(self, tokens, idx, options, env):  # type: ignore[no-untyped-def]
        return '<div class="table-wrap">\n' + self.renderToken(tokens, idx, options, env)

    def table_close(self, tokens, idx, options, env):  # type: ignore[no-untyped-def]
        return self.renderToken(tokens, idx, options, env) + "</div>\n"

    parser.add_render_rule("table_open", table_open)
    parser.add_render_rule("table_close", table_close)
    return parser


_PARSER = _parser()
CSS = resources.files("registry").joinpath("templates", "summary.css").read_text(encoding="utf-8")
#: The index's filter script: a file beside the pages, allowed by the CSP as 'self' (no inline script).
SITE_SCRIPT_NAME = "site.js"
SITE_SCRIPT = resources.files("registry").joinpath("templates", SITE_SCRIPT_NAME).read_text(encoding="utf-8")
_PAGE = Template(resources.files("registry").joinpath("templates", "page.html").read_text(encoding="utf-8"))


def markdown_to_html(text: str) -> str:
    return _PARSER.render(text)


def insert_figure(body: str, src: str, alt: str, svg: str, caption: str) -> str:
    """Replace the paragraph holding our image reference ``src`` with a <figure> around the inline SVG."""
    reference = f'<p><img src="{html.escape(src)}" alt="{html.escape(alt)}" /></p>'
    if body.count(reference) != 1:
        raise ValueError(f"expected exactly one reference to {src!r} in the rendered summary")
    figure = f"<figure>\n{svg}\n<figcaption>{html.escape(caption)}</figcaption>\n</figure>"
    return body.replace(reference, figure)


_FLAG = re.compile(r"<strong>([✔⚠✖]) ")
_LEVELS = {"✔": "good", "⚠": "warn", "✖": "bad"}


def mark_flags(body: str) -> str:
    """Give the verdict flags the Markdown wrote (``**✔ ok**``, ``**✖ DRIFT**``) their colour class,
    and the status lines at the top theirs."""
    body = _FLAG.sub(lambda m: f'<strong class="flag flag-{_LEVELS[m.group(1)]}">{m.group(1)} ', body)
    return re.sub(r"<p>(Rendered |Sample size: )", r'<p class="status">\1', body)


def _css_string(text: str) -> str:
    return '"' + "".join(ch if ch.isalnum() or ch in " .:-_/()·," else f"\\{ord(ch):x} " for ch in text) + '"'


def page(*, title: str, body: str, rendered_at: str, tool_version: str, caution: str, nav: str = "",
         wide: bool = False, running_header: str = "", script: bool = False) -> str:
    """A complete HTML document; ``title`` and ``caution`` are plain text, ``body`` and ``nav`` are HTML.
    ``wide`` gives a table-heavy page (the index) a wider column; ``running_header`` (plain text) is
    printed at the top of every printed page."""
    css = CSS
    if running_header:
        css += f"@page {{ @top-left {{ content: {_css_string(running_header)}; }} }}\n"
    return _PAGE.substitute(
        script_src="; script-src 'self'" if script else "",
        script=f'<script src="{SITE_SCRIPT_NAME}" defer></script>\n' if script else "",
        layout="wide" if wide else "reading",
        title=html.escape(title),
        css=css,
        body=mark_flags(body),
        nav=nav,
        rendered_at=html.escape(rendered_at),
        tool_version=html.escape(tool_version),
        caution=html.escape(caution),
    )
