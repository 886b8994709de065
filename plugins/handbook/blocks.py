"""The pieces every handbook page repeats most, made in Python rather than in a template.

A fleet's handbook has tens of thousands of pages. The verdict badge appears on
every point row, the points table on every test page and the plugins' page
blocks on every page, and a jinja2 macro call or loop costs several times what
a Python function does. These functions give the same HTML the templates would
(jinja2's autoescaping, via markupsafe; a value missing from a row prints as
jinja2's undefined does) and are registered in the template environment: the
global ``verdict`` and the filters ``blocks_html``, ``point_rows``, ``num`` and
``phase``.
"""

from __future__ import annotations

import re
from typing import Any

from jinja2 import ChainableUndefined
from loopledger.contracts import Section
from loopledger.plugins.handbook.values import plain
from markupsafe import Markup, escape

#: what a row's missing value is (as in a template: prints as "", is falsy)
MISSING = ChainableUndefined()
PHASES = {"as_found": "as found", "as_left": "as left"}

#: markupsafe's escapes, applied to plain text in one C call (no Markup object per cell)
_ESCAPES = str.maketrans({"&": "&amp;", "<": "&lt;", ">": "&gt;", "'": "&#39;", '"': "&#34;"})


def _esc(v: Any) -> str:
    """``str(escape(v))``, quicker for plain text, which most cells are."""
    return v.translate(_ESCAPES) if type(v) is str else str(escape(v))


def num(value: Any, digits: int = 4, sign: bool = False) -> str:
    """A number with ``digits`` decimals (``sign``: always signed); "—" for none; other values as text."""
    if value is None or value == "":
        return "—"
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        return str(value)
    return f"{value:+.{digits}f}" if sign else f"{value:.{digits}f}"


def phase(v: Any) -> str:
    return PHASES.get(v, v or "")


#: the words and marks of each verdict; the marks are hidden from screen readers
VERDICT_WORDS = {"pass": "Pass", "fail": "Fail", "adjusted": "Adjusted", "invalid": "Invalid file",
                 "untested": "No valid test", "conditional-pass": "Conditional pass",
                 "conditional-fail": "Conditional fail"}
VERDICT_MARKS = {"pass": "✓", "fail": "✗", "adjusted": "↻", "invalid": "!", "untested": "–",
                 "conditional-pass": "✓?", "conditional-fail": "✗?"}


def verdict(v: Any) -> Markup:
    """A verdict as a badge: class ``v-<verdict>``, a mark and the verdict's words."""
    return Markup(f'<span class="verdict v-{_esc(v or "none")}"><span aria-hidden="true">'
                  f'{_esc(VERDICT_MARKS.get(v, "·"))} </span>{_esc(VERDICT_WORDS.get(v, v or "—"))}</span>')


def _item(row: Any, i: int) -> Any:
    """``row[i]``, or "" where the row has no such item (as a template prints a missing value)."""
    try:
        return row[i]
    except (TypeError, LookupError):
        return ""


def _same(v: Any) -> Any:
    return v


def _row(row: Any, cell: Any) -> Any:
    """A row's cells made by ``cell`` (page data, already plain, is taken as it is)."""
    if isinstance(row, (list, tuple)):
        return row if cell is _same else [v if type(v) is str else plain(v) for v in row]
    return cell(row)


#: text without white space (str.isspace's definition, as ``\s`` in a str pattern)
_NO_SPACE = re.compile(r"\S*")


def one_token(value: Any) -> bool:
    """A cell that is one token with a hyphen (a date, an asset or instrument id): never broken at its
    hyphens (a browser may break after any hyphen, leaving '2026-03-' above '17')."""
    text = str(value)
    return "-" in text and len(text) <= 40 and _NO_SPACE.fullmatch(text) is not None


def _td(value: Any) -> str:
    return ('<td class="nw">' if one_token(value) else "<td>") + _esc(value) + "</td>"


#: a table whose widest line (:func:`table_chars`) is longer than this many characters spans the printed
#: page's two columns of sections (about 9 cm each: some 60 characters of 6.5 pt text with the cells' padding)
WIDE_CHARS = 60


def table_chars(columns: Any, rows: Any, enough: int | None = None) -> int:
    """About how many characters wide a table must be: per column, the longest of its cells and of the words
    of its heading (a heading wraps between words), plus two for the padding. With ``enough``, stops once
    the width passes it (a long budget is known to be wide after its first row)."""
    widths = [max((len(w) for w in str(c).split()), default=0) + 2 for c in columns or []]
    for row in rows or []:
        if enough is not None and sum(widths) > enough:
            break
        if isinstance(row, (list, tuple)):
            for i, v in enumerate(row[:len(widths)]):
                widths[i] = max(widths[i], len(str(v)) + 2)
    return sum(widths)


def _block(get: Any, cell: Any) -> str:
    kind = get("kind")
    screen = bool(get("screen_only"))
    body = [_row(row, cell) for row in get("rows") or []] if kind == "table" else []
    columns = [cell(c) for c in get("columns") or []] if kind == "table" else []
    wide = kind == "table" and table_chars(columns, body, WIDE_CHARS) > WIDE_CHARS
    mark = get("mark")  # the findings this block states in full (:func:`finding_mark`)
    parts = ['<section class="plugin-section', " screen-only" if screen else "", " wide" if wide else "", '">\n  <h2>',
             _esc(cell(get("title"))), f' <span class="finding-mark">{_esc(mark)}</span>' if mark else "", "</h2>\n"]
    if kind == "facts":
        parts.append('  <dl class="facts">')
        for pair in get("rows") or []:
            pair = _row(pair, cell)
            parts += ["<dt>", _esc(_item(pair, 0)), "</dt><dd>", _esc(_item(pair, 1)), "</dd>"]
        parts.append("</dl>\n")
    elif kind == "table":
        parts.append('  <div class="scroll"><table><thead><tr>')
        for c in columns:
            parts += ['<th scope="col">', _esc(c), "</th>"]
        parts.append("</tr></thead>\n  <tbody>")
        for cells in body:
            parts.append("<tr>" + "".join(_td(c) for c in cells) + "</tr>")
        parts.append("</tbody></table></div>\n")
    elif kind == "text":
        parts += ["<p>", _esc(cell(get("text"))), "</p>\n"]
    elif kind in ("html", "svg"):
        parts += ["<figure>", str(cell(get("html")))]
        alt = cell(get("alt"))
        if alt:
            parts += ["<figcaption>", _esc(alt), "</figcaption>"]
        parts.append("</figure>\n")
    parts.append("</section>")
    if screen:  # what the printed page says in its place
        parts += ['<p class="print-only">', _esc(cell(get("title"))), ": on the screen page (", _esc(str(len(
            get("rows") or []))), " rows); the per-point summary above gives each point's figures.</p>"]
    return "".join(parts)


def block_html(s: dict[str, Any]) -> str:
    """One plugin block, as a dict of page data (:func:`values.section_dict`), as a page section."""
    return _block(s.get, _same)


def blocks_html(sections: Any) -> Markup:
    """A page's plugin blocks (dicts of page data), in the order given."""
    return Markup("".join(block_html(s) for s in sections or []))


def sections_html(sections: list[Section] | None, marks: dict[int, str] | None = None) -> Markup:
    """A page's plugin blocks straight from the plugins' :class:`Section` objects: the same HTML as
    :func:`blocks_html` of their page-data dicts, without making the dicts. ``marks``: the finding mark
    of a block, by its place in ``sections``."""
    marks = marks or {}
    return Markup("".join(_block(lambda name, s=s, i=i: marks.get(i) if name == "mark" else getattr(s, name, None),
                                 plain) for i, s in enumerate(sections or [])))


#: the mark of each severity (a shape as well as the word, so the meaning does not rest on colour)
SEVERITY_MARKS = {"error": "✖", "warning": "⚠", "note": "ℹ"}


def finding_mark(findings: list[dict[str, Any]]) -> str:
    """The mark beside a block's title for the findings it states in full: each finding's severity word
    and shape, and its line and field where the finding names them ("⚠ warning (line 6, field connection)")."""
    said: dict[str, int] = {}
    for f in findings:
        where = ", ".join(w for w in (f"line {f['line']}" if f.get("line") else "",
                                      f"field {f['field']}" if f.get("field") else "") if w)
        key = f"{f['severity']}" + (f" ({where})" if where else "")
        said[key] = said.get(key, 0) + 1
    return "; ".join(f"{SEVERITY_MARKS.get(key.split(' ')[0], '·')} " + (f"{n} × " if n > 1 else "") + key
                     for key, n in said.items())


def point_rows(points: list[dict[str, Any]] | None, point_cols: Any, rule: Any) -> Markup:
    """The body rows of a test page's points table: one row per point, its decision third (in sight on a
    narrow screen), the uncertainty, TUR and NE 43 cells only where ``point_cols`` has them; a point without
    its own decision rule shows ``rule``."""
    with_u, with_tur, with_band = ("U" in point_cols), ("tur" in point_cols), ("ne43_band" in point_cols)
    out: list[str] = []
    for p in points or []:
        g = p.get
        out += ['<tr class="d-', _esc(g("decision", MISSING)), '">\n<td>', _esc(phase(g("phase", MISSING))),
                "</td><td>", _esc(g("point", MISSING)), "</td><td>", verdict(g("decision", MISSING)), "</td><td>",
                _esc(g("input", MISSING)), "</td><td>",
                _esc(num(g("input_pct", MISSING), 1)), "</td><td>", _esc(g("reading_text", MISSING) or "—"),
                "</td>\n<td>", _esc(num(g("expected", MISSING))), "</td><td>", _esc(num(g("measured", MISSING))),
                "</td><td>", _esc(num(g("error", MISSING), 4, sign=True)), "</td><td>",
                _esc(num(g("error_pct_span", MISSING), 3, sign=True)), "</td>\n<td>",
                _esc(num(g("mpe", MISSING))), "</td><td>", _esc(num(g("acceptance_limit", MISSING))), "</td>\n"]
        if with_u:
            k = g("k", MISSING)
            out += ["<td>", _esc(num(g("U", MISSING))), f" (k={_esc(num(k, 2))})" if k else "", "</td>"]
        if with_tur:
            out += ["<td>", _esc(num(g("tur", MISSING), 1)), "</td>"]
        if with_band:
            out += ["<td>", _esc(g("ne43_band", MISSING) or "—"), "</td>"]
        out += ["<td>", _esc(g("decision_rule", MISSING) or rule), "</td>\n</tr>\n"]
    return Markup("".join(out))
