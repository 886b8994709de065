"""The handbook's look: the jinja2 environment over the site/ theme, its filters, Markdown remarks rendered
safely, and the digest of everything that shapes a page's HTML (theme files, these modules, library versions).
"""

from __future__ import annotations

import hashlib
import importlib.resources
import json
from dataclasses import dataclass, field
from functools import lru_cache
from typing import Any

from loopledger.plugins.handbook import blocks
from loopledger.plugins.handbook.blocks import num as _num

#: bump when the page-making code changes in a way the template digest would not show
FORMAT = 1


STATIC = ("style.css", "filter.js")


ALLOWED_TAGS = {"p", "em", "strong", "ul", "ol", "li", "code", "pre", "br", "table", "thead", "tbody", "tr",
                "th", "td", "blockquote", "h3", "h4", "hr"}


#: Markdown rules that would make a link or fetch something (markdown-it's names): left as the text written
LINKING = ("link", "image", "autolink", "reference")


def render_markdown(text: Any) -> str:
    """Markdown remarks rendered and sanitised: no script, handler, link or remote resource survives.

    markdown-it (CommonMark, with tables) renders them with HTML off, so any HTML the remark contains shows
    as the text that was written, once escaped (a code span `<b>` shows <b>); link and image syntax is not
    interpreted; nh3 then keeps only plain formatting tags, without attributes. markdown-it's time grows
    linearly with the text (tests/pipeline/test_hostile_evidence.py), and remarks are limited in size
    (``limits.max_remarks_bytes``).
    """
    if text is None or isinstance(text, float) or not str(text).strip():
        return ""
    return _remark_html(str(text))


@lru_cache(maxsize=4096)
def _remark_html(text: str) -> str:
    """One remark's sanitised HTML (kept per text: a fleet's remarks repeat a few standard phrases)."""
    import nh3

    rendered = _markdown().render(text)
    return nh3.clean(rendered, tags=ALLOWED_TAGS, attributes={}, url_schemes=set(), link_rel=None)


_MD: Any = None


def _markdown() -> Any:
    """One Markdown renderer per process: CommonMark with tables, HTML off, without link or image syntax."""
    global _MD
    if _MD is None:
        from markdown_it import MarkdownIt

        _MD = MarkdownIt("commonmark", {"html": False}).enable("table").disable(list(LINKING))
    return _MD


_ENV: Any = None


def environment() -> Any:
    global _ENV
    if _ENV is None:
        import jinja2

        env = jinja2.Environment(
            loader=jinja2.PackageLoader("loopledger.site", "templates"),
            autoescape=True, undefined=jinja2.ChainableUndefined, trim_blocks=True, lstrip_blocks=True,
            keep_trailing_newline=True, auto_reload=False,  # templates do not change during a run: no stat per page
            finalize=_shown,
        )
        env.filters["num"] = _num
        env.filters["signed"] = lambda v, d=3: _num(v, d, sign=True)
        env.filters["point_rows"] = blocks.point_rows
        env.filters["g"] = _g
        env.filters["phase"] = blocks.phase
        env.filters["blocks_html"] = blocks.blocks_html
        env.globals["verdict"] = blocks.verdict
        _ENV = env
    return _ENV


def _shown(value: Any) -> Any:
    """What a page shows for a value: a missing one (None, NaN) as a dash, never the words 'None' or 'nan'."""
    if value is None or (isinstance(value, float) and value != value):
        return "—"
    return value


def _g(value: Any) -> str:
    return "—" if value is None or value == "" else (f"{value:g}" if isinstance(value, float) else str(value))


def _theme_digest() -> str:
    root = importlib.resources.files("loopledger.site")
    import jinja2
    import markdown_it
    import nh3

    versions = [FORMAT, jinja2.__version__, markdown_it.__version__, getattr(nh3, "__version__", "")]
    h = hashlib.sha256(json.dumps(versions).encode())
    for folder in ("templates", "static"):
        for item in sorted(root.joinpath(folder).iterdir(), key=lambda p: p.name):
            if item.is_file():
                h.update(item.name.encode() + b"\0" + item.read_bytes())
    for module in ("charts.py", "svgplot.py", "dateaxis.py", "build.py", "blocks.py"):
        h.update(importlib.resources.files("loopledger.plugins.handbook").joinpath(module).read_bytes())
    return h.hexdigest()


@dataclass
class Job:
    """One page to write: its template and data, and the charts it shows inline (page-data key -> kind,
    data, title; the chart's SVG and text alternative are drawn when the page is rendered)."""

    rel: str
    template: str
    data: dict[str, Any]
    charts: dict[str, tuple[str, dict[str, Any], str]] = field(default_factory=dict)

    def digest(self, theme: str) -> str:
        # keys in the order the page data was made (that order is part of what the page shows), text as
        # ASCII escapes: about half the time of sorted keys and UTF-8 text, over tens of thousands of pages
        blob = json.dumps([theme, self.rel, self.template, self.data, self.charts], default=str, allow_nan=False)
        return hashlib.sha256(blob.encode("ascii")).hexdigest()


def render_job(job: Job) -> bytes:
    """One page's HTML, its charts drawn into it as inline SVG (a test page is one self-contained file)."""
    from loopledger.plugins.handbook import charts

    page = dict(job.data)
    for key, (kind, data, title) in job.charts.items():
        if kind == "error":
            page[key] = {"svg": charts.error_chart(data, title), "alt": charts.error_alt(data)}
        else:
            page[key] = {"svg": charts.drift_chart(data, title), "alt": charts.drift_alt(data)}
    return environment().get_template(job.template).render(**page).encode("utf-8")


def _depth(rel: str) -> str:
    return "../" * rel.count("/")
