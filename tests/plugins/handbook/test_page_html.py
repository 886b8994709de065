"""The page blocks and verdict badges made in Python give the HTML jinja2 would give.

Reference: jinja2 itself (with markupsafe autoescaping) rendering the equivalent
template macros, with the handbook's environment settings. Hostile text must come
out escaped exactly as jinja2 escapes it.
"""

from __future__ import annotations

import jinja2
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from loopledger.plugins.handbook import blocks

REFERENCE = """\
{% macro verdict(v) -%}
{%- set words = {'pass': 'Pass', 'fail': 'Fail', 'adjusted': 'Adjusted', 'invalid': 'Invalid file', \
'untested': 'No valid test', 'conditional-pass': 'Conditional pass', 'conditional-fail': 'Conditional fail'} -%}
{%- set marks = {'pass': '✓', 'fail': '✗', 'adjusted': '↻', 'invalid': '!', 'untested': '–', \
'conditional-pass': '✓?', 'conditional-fail': '✗?'} -%}
<span class="verdict v-{{ v or 'none' }}"><span aria-hidden="true">{{ marks.get(v, '·') }} </span>\
{{ words.get(v, v or '—') }}</span>
{%- endmacro %}
{% macro section(s) -%}
<section class="plugin-section{{ ' screen-only' if s.screen_only }}\
{{ ' wide' if s.kind == 'table' and s is wide }}">
  <h2>{{ s.title }}{% if s.mark %} <span class="finding-mark">{{ s.mark }}</span>{% endif %}</h2>
  {% if s.kind == 'facts' %}
  <dl class="facts">{% for pair in s.rows %}<dt>{{ pair[0] }}</dt><dd>{{ pair[1] }}</dd>{% endfor %}</dl>
  {% elif s.kind == 'table' %}
  <div class="scroll"><table><thead><tr>{% for c in s.columns %}<th scope="col">{{ c }}</th>{% endfor %}\
</tr></thead>
  <tbody>{% for r in s.rows %}<tr>{% for v in r %}<td{% if v is one_token %} class="nw"{% endif %}>{{ v }}</td>\
{% endfor %}</tr>{% endfor %}</tbody></table></div>
  {% elif s.kind == 'text' %}<p>{{ s.text }}</p>
  {% elif s.kind in ('html', 'svg') %}<figure>{{ s.html | safe }}{% if s.alt %}<figcaption>{{ s.alt }}</figcaption>\
{% endif %}</figure>
  {% endif %}
</section>{% if s.screen_only %}<p class="print-only">{{ s.title }}: on the screen page ({{ (s.rows or []) | length }} \
rows); the per-point summary above gives each point's figures.</p>{% endif %}
{%- endmacro %}
"""


POINT_ROWS = """\
{% from 'm.html' import verdict %}{% for p in points %}<tr class="d-{{ p.decision }}">
<td>{{ p.phase | phase }}</td><td>{{ p.point }}</td><td>{{ verdict(p.decision) }}</td><td>{{ p.input }}</td>\
<td>{{ p.input_pct | num(1) }}</td>\
<td>{{ p.reading_text or '—' }}</td>
<td>{{ p.expected | num }}</td><td>{{ p.measured | num }}</td><td>{{ p.error | signed(4) }}</td>\
<td>{{ p.error_pct_span | signed(3) }}</td>
<td>{{ p.mpe | num }}</td><td>{{ p.acceptance_limit | num }}</td>
{% if 'U' in point_cols %}<td>{{ p.U | num }}{% if p.k %} (k={{ p.k | num(2) }}){% endif %}</td>{% endif %}\
{% if 'tur' in point_cols %}<td>{{ p.tur | num(1) }}</td>{% endif %}
{% if 'ne43_band' in point_cols %}<td>{{ p.ne43_band or '—' }}</td>{% endif %}
<td>{{ p.decision_rule or rule }}</td>
</tr>
{% endfor %}"""


def _env() -> jinja2.Environment:
    env = jinja2.Environment(loader=jinja2.DictLoader({"m.html": REFERENCE}), autoescape=True,
                             undefined=jinja2.ChainableUndefined, trim_blocks=True, lstrip_blocks=True,
                             keep_trailing_newline=True)
    env.filters["num"] = blocks.num
    env.tests["wide"] = lambda s: blocks.table_chars(s.get("columns"), s.get("rows")) > blocks.WIDE_CHARS  # see below
    env.tests["one_token"] = lambda v: "-" in str(v) and len(str(v)) <= 40 and not any(c.isspace() for c in str(v))
    env.filters["signed"] = lambda v, d=3: blocks.num(v, d, sign=True)
    env.filters["phase"] = lambda v: {"as_found": "as found", "as_left": "as left"}.get(v, v or "")
    return env


def _jinja_blocks(sections: list[dict]) -> str:
    page = "{% from 'm.html' import section %}{% for s in sections %}{{ section(s) }}{% endfor %}"
    return _env().from_string(page).render(sections=sections)


def _jinja_verdict(v: object) -> str:
    return _env().from_string("{% from 'm.html' import verdict %}{{ verdict(v) }}").render(v=v)


HOSTILE = ['<script>alert("x")</script>', "a & b", "it's \"quoted\"", "", None, 0.0041, -3, True, "Ω ± µA"]

CASES = [
    {"title": "Loop", "kind": "facts", "rows": [["Burden", "250 Ω"], ["Margin", 12.5], ["<b>", None]]},
    {"title": "Short rows", "kind": "facts", "rows": [["only a label"], "xy", []]},
    {"title": "Table & more", "kind": "table", "columns": ["Point", "<Error>"],
     "rows": [[1, 0.012], ["2", "<i>x</i>"], []]},
    {"title": "Empty table", "kind": "table", "columns": [], "rows": []},
    {"title": "Note", "kind": "text", "text": "Check the <shunt> & leads"},
    {"title": "Chart", "kind": "svg", "html": "<svg><text>1 &lt; 2</text></svg>", "alt": "a <chart>"},
    {"title": "Raw", "kind": "html", "html": "<p>made safe by the plugin</p>", "alt": ""},
    {"title": "Unknown kind", "kind": "something-else", "rows": [["a", "b"]]},
    {"title": None, "kind": "text", "text": None},
    {"title": "Budget", "kind": "table", "columns": list("abcdefg"), "rows": [["2026-03-17", "QM-P1-I", "a - b"]] * 3,
     "screen_only": True},
    {"title": "Marked", "kind": "text", "text": "stated in full", "mark": "⚠ warning (field <b>)"},
]


@pytest.mark.parametrize("section", CASES, ids=[str(c["title"]) for c in CASES])
def test_each_block_kind_matches_jinja(section: dict) -> None:
    assert blocks.blocks_html([section]) == _jinja_blocks([section])


def test_several_blocks_and_none() -> None:
    assert blocks.blocks_html(CASES) == _jinja_blocks(CASES)
    assert blocks.blocks_html([]) == "" == _jinja_blocks([])
    assert blocks.blocks_html(None) == ""


@pytest.mark.parametrize("v", ["pass", "fail", "adjusted", "invalid", "untested", "conditional-pass",
                               "conditional-fail", "", None, "overdue", '<img src=x onerror="1">'])
def test_verdict_badge_matches_jinja(v: object) -> None:
    assert blocks.verdict(v) == _jinja_verdict(v)


cells = st.one_of(st.text(max_size=12), st.none(), st.floats(allow_nan=False), st.integers(), st.booleans())


@settings(max_examples=60, deadline=None)
@given(title=st.text(max_size=10), kind=st.sampled_from(["facts", "table", "text", "svg"]),
       rows=st.lists(st.lists(cells, max_size=4), max_size=4), columns=st.lists(st.text(max_size=6), max_size=3),
       text=st.text(max_size=20), alt=st.text(max_size=8))
def test_random_blocks_match_jinja(title: str, kind: str, rows: list, columns: list, text: str, alt: str) -> None:
    section = {"title": title, "kind": kind, "rows": rows, "columns": columns, "text": text,
               "html": "<svg></svg>", "alt": alt}
    assert blocks.blocks_html([section]) == _jinja_blocks([section])


def test_hostile_cells_are_escaped() -> None:
    out = blocks.blocks_html([{"title": "x", "kind": "table", "columns": ["c"], "rows": [[h] for h in HOSTILE]}])
    assert "<script>" not in out and "&lt;script&gt;" in out
    assert out == _jinja_blocks([{"title": "x", "kind": "table", "columns": ["c"], "rows": [[h] for h in HOSTILE]}])


POINTS = [
    {"phase": "as_found", "point": 1, "input": 0.0, "input_pct": 0.0, "reading_text": "4.012 mA", "expected": 4.0,
     "measured": 4.012, "error": 0.012, "error_pct_span": 0.075, "mpe": 0.08, "acceptance_limit": 0.064,
     "U": 0.0031, "k": 2.0, "tur": 25.8, "decision": "pass", "decision_rule": "guarded", "ne43_band": "normal"},
    {"phase": "as_left", "point": 2, "input": "50 %", "input_pct": 50.0, "reading_text": None, "expected": None,
     "measured": float("-0.0"), "error": -0.5, "error_pct_span": None, "mpe": 0.08, "acceptance_limit": 0.08,
     "U": None, "k": None, "tur": None, "decision": "fail", "decision_rule": None, "ne43_band": None},
    {"phase": "<b>odd</b>", "point": "3\"", "input": '<script>x</script>', "decision": "conditional-pass",
     "reading_text": "a & b", "k": 0.0},  # keys missing, as where a stage left no column
    {},
]


@pytest.mark.parametrize("cols", [[], ["U"], ["U", "tur", "ne43_band"], ["tur"], ["ne43_band"]])
def test_point_rows_match_jinja(cols: list[str]) -> None:
    page = _env().from_string(POINT_ROWS).render(points=POINTS, point_cols=cols, rule="simple")
    assert blocks.point_rows(POINTS, cols, "simple") == page
    assert blocks.point_rows([], cols, "simple") == ""


point_values = st.one_of(st.none(), st.floats(allow_nan=False, allow_infinity=False), st.integers(-5, 5),
                         st.text(max_size=6))


@settings(max_examples=60, deadline=None)
@given(st.lists(st.dictionaries(st.sampled_from(["phase", "point", "input", "input_pct", "reading_text", "expected",
                                                 "measured", "error", "error_pct_span", "mpe", "acceptance_limit",
                                                 "U", "k", "tur", "decision", "decision_rule", "ne43_band"]),
                                point_values, max_size=17), max_size=4),
       st.lists(st.sampled_from(["U", "tur", "ne43_band"]), unique=True))
def test_random_point_rows_match_jinja(points: list[dict], cols: list[str]) -> None:
    page = _env().from_string(POINT_ROWS).render(points=points, point_cols=cols, rule="risk")
    assert blocks.point_rows(points, cols, "risk") == page


def test_blocks_straight_from_sections_match_their_page_data() -> None:
    """A plugin's Section objects (numpy numbers, NaN, tuples, hostile text) give the same HTML as the page
    data made from them, which jinja2 renders as above."""
    import numpy as np
    from loopledger.contracts import Section
    from loopledger.plugins.handbook.values import section_dict

    sections = [
        Section("Budget <u>", kind="table", columns=["Term", "u (mA)"],
                rows=[("meter", np.float64(0.0021)), ["shunt & leads", np.nan], ("k", np.int64(2)), "ab"]),
        Section("Facts", rows=[("Margin", np.float32(1.5)), ("None", None), ("flag", np.bool_(True)), ("x",)]),
        Section("Words", kind="text", text='say "<b>"'),
        Section("Chart", kind="svg", html="<svg></svg>", alt="error & input"),
        Section(np.nan, kind="facts", rows=[]),  # type: ignore[arg-type]
    ]
    dicts = [section_dict(s) for s in sections]
    assert blocks.sections_html(sections) == blocks.blocks_html(dicts) == _jinja_blocks(dicts)
    assert blocks.sections_html(None) == "" == blocks.sections_html([])
    marked = [dict(d, mark="⚠ 2 × warning (field <x>)") if i == 2 else d for i, d in enumerate(dicts)]
    assert blocks.sections_html(sections, {2: "⚠ 2 × warning (field <x>)"}) == _jinja_blocks(marked)


def test_a_table_spans_both_printed_columns_only_when_its_widest_line_would_not_fit_one():
    # per column: the longest cell or heading word, plus 2 for the padding
    assert blocks.table_chars(["Phase", "U (95.45 %)"], [["as-found", "0.01549"], ["as-left", "0.1"]]) == 10 + 9
    assert blocks.table_chars(["a", "b"], [["x"], "not a row"]) == 3 + 3  # short rows and odd rows: headings
    summary = [["as-found", "5", "0.007745", "2", "∞", "0.01549", "GUM", "< 0.001 %"]] * 5
    assert blocks.table_chars(["Phase", "#", "u", "k", "ν_eff", "U (95.45 %)", "U from", "Risk (true error "
                                                                                      "outside ±MPE)"], summary) <= 60
    split = [["as-found", "0", "heron/2026/HB-PS1-PT-101_2026-08-12", "heron/2026/HB-PS1-PT-101_2026-08-12_plc",
              "+0.062", "+0.195", "+0.133"]]
    assert blocks.table_chars(list("abcdefg"), split) > 60
    assert blocks.table_chars(list("abcdefg"), split * 3, 60) == blocks.table_chars(list("abcdefg"), split)
    html = blocks.blocks_html([{"title": "t", "kind": "table", "columns": list("abcdefg"), "rows": split},
                               {"title": "n", "kind": "table", "columns": list("abcdefgh"), "rows": summary}])
    assert html.count('class="plugin-section wide"') == 1
