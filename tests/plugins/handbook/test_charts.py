"""The handbook's SVG charts: well-formed SVG 1.1 (checked with the standard library's XML parser), points
where the axes read back from the chart's own tick labels put them, 'nice' ticks (the 1-2-5 rule, common
practice), escaped text, the same bytes for the same data, and a valid chart for missing or wild values.
Chart data here is invented plumbing data."""

from __future__ import annotations

import copy
import datetime as dt
import math
import re
import xml.etree.ElementTree as ET
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from loopledger.cli import main
from loopledger.plugins.handbook import asset_pages, charts, svgplot

from tests.evidence import good_points, result_yaml, write_evidence

SVG = "{http://www.w3.org/2000/svg}"
NUMBER = re.compile(r"-?\d+(?:\.\d+)?(?:e[+-]?\d+)?")

# as-found offsets in mA over four yearly tests; the third test was trimmed back to +0.005 mA
HISTORY = [("2022-03-01", 0.020, None), ("2023-03-01", 0.050, None), ("2024-03-01", 0.090, 0.005),
           ("2025-03-01", 0.035, None)]


def parse(svg: str) -> ET.Element:
    """The chart parsed as XML (raises on a malformed file)."""
    return ET.fromstring(svg.encode("utf-8"))


def ticks(root: ET.Element, cls: str, coord: str) -> list[tuple[float, str]]:
    """(pixel, label) of the tick labels of class ``cls`` ('xt' or 'yt')."""
    return [(float(t.attrib[coord]), t.text or "") for t in root.iter(SVG + "text")
            if cls in t.attrib.get("class", "").split()]


def line_map(pairs: list[tuple[float, float]]) -> tuple[float, float]:
    """Slope and offset of pixel = offset + slope * value through the first and last (value, pixel)."""
    (v0, p0), (v1, p1) = pairs[0], pairs[-1]
    slope = (p1 - p0) / (v1 - v0)
    return slope, p0 - slope * v0


def starts(root: ET.Element, cls: str) -> list[tuple[float, float]]:
    """The points where the marks (or line pieces) of class ``cls`` are drawn: each 'M x,y' of their paths."""
    out = []
    for p in root.iter(SVG + "path"):
        if cls in p.attrib.get("class", "").split():
            out += [(float(x), float(y)) for x, y in re.findall(r"M(-?[\d.]+),(-?[\d.]+)", p.attrib["d"])]
    return out


def day(text: str) -> float:
    """Days since 1970-01-01 (the standard library's calendar is the reference)."""
    return float((dt.date.fromisoformat(text) - dt.date(1970, 1, 1)).days)


def label_day(text: str) -> float:
    """The day a date-axis label names: ``2024`` is 1 January, ``2024-03`` the 1st of March."""
    parts = [int(p) for p in text.split("-")]
    return day(dt.date(parts[0], *(parts[1:] + [1, 1])[:2]).isoformat())


def date_map(root: ET.Element) -> tuple[float, float]:
    """Pixel = offset + slope * day, read from the drift chart's date labels."""
    return line_map([(label_day(t), p) for p, t in ticks(root, "xt", "x")])


def all_numbers_finite(root: ET.Element) -> bool:
    for el in root.iter():
        for name in ("d", "x", "y", "width", "height", "textLength"):
            if name in el.attrib and not all(math.isfinite(float(n)) for n in NUMBER.findall(el.attrib[name])):
                return False
    return True


def error_data(**changes: object) -> dict[str, object]:
    pts = [{"phase": "as_found", "input_pct": x, "error_pct": e, "mpe_pct": 0.5, "accept_pct": 0.5, "U_pct": 0.05}
           for x, e in ((0.0, -0.1), (25.0, 0.123), (50.0, 0.2), (75.0, 0.31), (100.0, 0.42))]
    pts += [{"phase": "as_left", "input_pct": x, "error_pct": e, "mpe_pct": 0.5, "accept_pct": 0.4, "U_pct": 0.05}
            for x, e in ((0.0, 0.01), (50.0, -0.02), (100.0, 0.03))]
    for p in pts:
        p.update(changes)
    return {"points": pts}


def drift_data() -> dict[str, object]:
    dates = ["2021-03-01", "2022-03-01", "2023-03-01", "2024-03-01", "2025-03-01"]
    pts = [{"date": d, "input_pct": x, "error_pct": 0.05 * i + x / 1000, "as_left_pct": None, "trims_pct": 0.0}
           for x in (0.0, 50.0, 100.0) for i, d in enumerate(dates)]
    fits = [{"input_pct": x, "slope_pct_per_year": 0.05, "intercept_pct": x / 1000, "ref_date": dates[0], "n": 5,
             "stderr": 0.01} for x in (0.0, 50.0, 100.0)]
    return {"points": pts, "fits": fits, "mpe_pct": 0.5, "end": "2025-06-01"}


# --------------------------------------------------------------------------------------------------------
# nice ticks (the 1-2-5 rule, common practice)

@settings(max_examples=300, deadline=None)
@given(st.floats(-1e9, 1e9), st.floats(0.0, 1e9), st.integers(3, 10))
def test_ticks_are_1_2_5_steps_covering_the_data(lo: float, width: float, most: int) -> None:
    data = np.array([lo, lo + width])
    low, high = svgplot.span_of(data)  # the range the charts tick: widened when the values (nearly) agree
    assert low < high and low <= data.min() and high >= data.max()
    values, step = svgplot.nice_ticks(low, high, most)
    mantissa = step / 10 ** math.floor(math.log10(step))
    assert any(math.isclose(mantissa, m, rel_tol=1e-9) for m in (1.0, 2.0, 5.0, 10.0))
    assert values[0] <= data.min() + step * 1e-9 and values[-1] >= data.max() - step * 1e-9
    assert len(values) <= most + 2
    rounding = 1e-12 * float(np.abs(values).max())  # float spacing at the ticks' magnitude
    assert np.allclose(np.diff(values), step, rtol=1e-9, atol=rounding)
    labels = svgplot.tick_text(values, step)
    assert len(set(labels)) == len(labels)  # every label tells its tick apart
    assert np.allclose([float(t) for t in labels], values, rtol=0, atol=step * 1e-3 + rounding)


def test_tick_labels_read_as_the_values() -> None:
    # worked by hand: 0..1 in at most 7 steps is 0.2 apart (0.1 would need 10 steps)
    values, step = svgplot.nice_ticks(0.0, 1.0, 7)
    assert step == pytest.approx(0.2)
    assert svgplot.tick_text(values, step) == ["0", "0.2", "0.4", "0.6", "0.8", "1.0"]
    values, step = svgplot.nice_ticks(-0.3, 0.0, 7)
    assert "-0" not in svgplot.tick_text(values, step)  # no negative zero label


# --------------------------------------------------------------------------------------------------------
# the error chart

def test_error_chart_points_land_where_its_axes_say() -> None:
    data = error_data()
    root = parse(charts.error_chart(data, "T-1: test of 2026-04-14"))
    xs = [(float(t), p) for p, t in ticks(root, "xt", "x")]
    ys = [(float(t), p) for p, t in ticks(root, "yt", "y")]
    ax, bx = line_map(xs)
    ay, by = line_map(ys)
    found = starts(root, "as_found")
    assert len(found) == 5
    # the second as-found point: 25 % input, +0.123 % error
    assert found[1][0] == pytest.approx(bx + ax * 25.0, abs=0.2)
    assert found[1][1] == pytest.approx(by + ay * 0.123, abs=0.2)
    assert ay < 0  # larger errors higher on the page
    # ticks are 1-2-5 steps and cover every error with its U bar
    values = [v for v, _p in ys]
    assert np.allclose(np.diff(values), values[1] - values[0])
    assert values[0] <= -0.5 and values[-1] >= 0.47  # the MPE and the top of the last U bar
    assert len(starts(root, "as_left")) == 3


def test_error_chart_is_accessible_scalable_and_escaped() -> None:
    hostile = 'A&B <script>alert("x")</script> \'q\' \x07\ud800end'
    svg = charts.error_chart(error_data(), hostile)
    root = parse(svg)
    assert root.tag == SVG + "svg" and root.attrib["role"] == "img"
    assert root.attrib["viewBox"] == f"0 0 {svgplot.WIDTH} {svgplot.HEIGHT}"
    assert root[0].tag == SVG + "title"
    assert root[0].text == 'A&B <script>alert("x")</script> \'q\' end'  # XML-forbidden characters dropped
    assert "<script" not in svg
    svg.encode("utf-8")  # no lone surrogate left
    texts = " ".join(t.text or "" for t in root.iter(SVG + "text"))
    assert "acceptance limit" in texts and "As left" in texts and "±U" in texts  # the key names each series


def test_same_data_gives_same_bytes() -> None:
    data = error_data()
    assert charts.error_chart(data, "T") == charts.error_chart(copy.deepcopy(data), "T")
    drift = drift_data()
    assert charts.drift_chart(drift, "T") == charts.drift_chart(copy.deepcopy(drift), "T")


def test_a_u_far_beyond_the_tolerance_is_cut_not_squashing_the_zone() -> None:
    data = error_data()
    data["points"][1]["U_pct"] = 40.0  # 80 times the MPE: a square root near zero ΔP, or a far too coarse rig
    root = parse(charts.error_chart(data, "T"))
    values = [float(t) for _p, t in ticks(root, "yt", "y")]
    # the y axis covers the errors, the ±MPE and at most three MPEs of U beyond them, not ±40 %
    assert values[0] <= -0.5 and values[-1] >= 0.5 and values[-1] - values[0] <= 4.0
    ay, by = line_map([(float(t), p) for p, t in ticks(root, "yt", "y")])
    bars = " ".join(p.attrib["d"] for p in root.iter(SVG + "path") if "ubar" in p.attrib.get("class", "").split())
    # that bar runs to both edges of the plot and ends in arrowheads there; the others keep their caps
    for edge in (svgplot.TOP, svgplot.BOTTOM):
        assert re.search(rf"L-?[\d.]+,{edge:.1f}L", bars)
    assert bars.count("h6") == 2 * (len(data["points"]) - 1)
    # the next point's bar (+0.2 % ± 0.05 %) is drawn whole, where the axes put it
    assert any(abs(float(v) - (by + ay * 0.25)) < 0.2 for v in re.findall(r"V(-?[\d.]+)", bars))
    assert "run beyond the chart" in charts.error_alt(data) and "±40 % of span" in charts.error_alt(data)


WILD_ERROR = {
    "empty": {"points": []},
    "no U, no MPE, no acceptance": error_data(U_pct=None, mpe_pct=None, accept_pct=None),
    "all errors missing": error_data(error_pct=None),
    "one point": {"points": [{"phase": "as_found", "input_pct": 50.0, "error_pct": 0.1, "mpe_pct": None}]},
    "all equal": error_data(error_pct=0.0, U_pct=0.0, mpe_pct=0.0, accept_pct=0.0),
    "huge": error_data(error_pct=1e300, U_pct=float("inf"), mpe_pct=-1e200),
    "negative range": error_data(input_pct=-40.0, error_pct=-7.5),
    "text instead of numbers": error_data(error_pct="n/a", input_pct="x"),
}


@pytest.mark.parametrize("name", list(WILD_ERROR))
def test_error_chart_survives_missing_and_wild_values(name: str) -> None:
    root = parse(charts.error_chart(WILD_ERROR[name], f"T-1 {name}"))
    assert all_numbers_finite(root)
    assert len(ticks(root, "yt", "y")) >= 2 and len(ticks(root, "xt", "x")) >= 2
    for x, y in starts(root, "pt"):
        assert svgplot.LEFT - 1 <= x <= svgplot.RIGHT + 1 and svgplot.TOP - 1 <= y <= svgplot.BOTTOM + 1
    assert charts.error_alt(WILD_ERROR[name]).startswith("Chart of error against input.")


# --------------------------------------------------------------------------------------------------------
# the drift chart

def test_drift_chart_dates_land_on_their_day() -> None:
    data = drift_data()
    root = parse(charts.drift_chart(data, "T-1"))
    labels = [t for _p, t in ticks(root, "xt", "x")]
    assert len(labels) >= 2 and all(re.fullmatch(r"\d{4}(-\d{2}(-\d{2})?)?", t) for t in labels)
    ax, bx = date_map(root)
    ay, by = line_map([(float(t), p) for p, t in ticks(root, "yt", "y")])
    found = starts(root, "as_found")
    assert len(found) == 15
    # 50 % input on 2023-03-01: error 0.05 * 2 + 0.05 = 0.15 %
    assert (pytest.approx(bx + ax * day("2023-03-01"), abs=0.3), pytest.approx(by + ay * 0.15, abs=0.2)) in found
    # every label lands where the map from the first and last puts it: one linear date axis
    for p, t in ticks(root, "xt", "x"):
        assert p == pytest.approx(bx + ax * label_day(t), abs=0.3)
    # one fitted line per test point, from the first test on to the as-of date
    pieces = starts(root, "fit")
    assert len(pieces) == 3 * 5
    assert min(x for x, _y in pieces) == pytest.approx(bx + ax * day("2021-03-01"), abs=0.3)


WILD_DRIFT = {
    "one day": {"points": [{"date": "2024-05-05", "input_pct": 0.0, "error_pct": 0.1}], "fits": [], "mpe_pct": None},
    "thirty years": {"points": [{"date": f"{y}-06-01", "input_pct": 50.0, "error_pct": 0.01 * (y - 1995)}
                                for y in range(1995, 2026)], "fits": [], "mpe_pct": 1.0, "end": "2026-01-01"},
    "dates missing or bad": {"points": [{"date": None, "input_pct": 0.0, "error_pct": 0.1},
                                        {"date": "not a date", "input_pct": 0.0, "error_pct": 0.2},
                                        {"date": "NaT", "input_pct": 25.0, "error_pct": 0.2}], "fits": []},
    "fits without slope": {**drift_data(), "fits": [{"input_pct": 0.0, "slope_pct_per_year": None,
                                                     "intercept_pct": None, "ref_date": "2021-03-01"}]},
    "huge": {"points": [{"date": "2020-01-01", "input_pct": 0.0, "error_pct": 1e305, "as_left_pct": -1e305,
                         "trims_pct": None}], "fits": [], "mpe_pct": float("nan"), "end": None},
    "many test points": {"points": [{"date": "2024-01-01", "input_pct": float(x), "error_pct": 0.0}
                                    for x in range(0, 101, 5)], "fits": [], "mpe_pct": 0.25},
}


@pytest.mark.parametrize("name", list(WILD_DRIFT))
def test_drift_chart_survives_missing_and_wild_values(name: str) -> None:
    root = parse(charts.drift_chart(WILD_DRIFT[name], f"T-1 <{name}>"))
    assert all_numbers_finite(root)
    labels = [t for _p, t in ticks(root, "xt", "x")]
    assert labels and all(re.fullmatch(r"\d{4}(-\d{2}(-\d{2})?)?", t) for t in labels)
    for x, y in starts(root, "pt"):
        assert svgplot.LEFT - 1 <= x <= svgplot.RIGHT + 1 and svgplot.TOP - 1 <= y <= svgplot.BOTTOM + 1
    assert charts.drift_alt(WILD_DRIFT[name]).startswith("Chart of as-found error over time")


def test_thirty_years_are_labelled_every_five() -> None:
    years = [int(t) for _p, t in ticks(parse(charts.drift_chart(WILD_DRIFT["thirty years"], "T")), "xt", "x")]
    assert years == list(range(1995, 2030, 5))


def pieces_of(root: ET.Element, series: str) -> list[tuple[float, float, float, float]]:
    """The straight pieces (x0, y0, x1, y1) of the fitted line of ``series`` (its class), in drawing order."""
    out = []
    for p in root.iter(SVG + "path"):
        if {"fit", series} <= set(p.attrib.get("class", "").split()):
            out += [tuple(map(float, m)) for m in re.findall(r"M(-?[\d.]+),(-?[\d.]+)L(-?[\d.]+),(-?[\d.]+)",
                                                             p.attrib["d"])]
    return out


def test_drift_line_restarts_at_the_as_left_point_of_an_adjustment(tmp_path: Path, run_folder) -> None:
    results = {f"t{i}.yaml": result_yaml(date=d, as_found=good_points(f),
                                         as_left=good_points(left) if left is not None else None)
               for i, (d, f, left) in enumerate(HISTORY)}
    ctx = run_folder(write_evidence(tmp_path / "ev", results, config="as_of = 2025-06-01\n"))
    data = asset_pages.drift_charts(ctx, ctx.assets.loc[["T-CT1"]], ctx.points)["T-CT1"]
    fit = data["fits"][0]
    # the drift model: each adjustment's step (as-found - as-left) is added back to the later as-found errors,
    # and a straight line is fitted to them by least squares; numpy.polyfit is the reference for that line
    span = 16.0  # mA, 4-20 mA
    years = np.array([(day(d) - day(HISTORY[0][0])) / 365.25 for d, _f, _l in HISTORY])
    step = (HISTORY[2][1] - HISTORY[2][2]) / span * 100.0
    continuous = np.array([f / span * 100.0 for _d, f, _l in HISTORY]) + np.array([0, 0, 0, step])
    slope, _intercept = np.polyfit(years, continuous, 1)
    assert float(fit["slope_pct_per_year"]) == pytest.approx(slope, rel=1e-6)
    # a trend at the default significance 0.05: scipy.stats.linregress's two-sided p-value is the reference
    from scipy.stats import linregress

    trend = linregress(years, continuous).pvalue < 0.05
    assert fit["status"] == ("trend" if trend else "no significant trend")
    root = parse(charts.drift_chart(data, "T-CT1"))
    widths = {p.attrib["stroke-width"] for p in root.iter(SVG + "path") if "fit" in p.attrib.get("class", "").split()}
    assert widths == {"1.2" if trend else "0.7"}  # a fit that is no trend is drawn thin
    ax, bx = date_map(root)
    ay, by = line_map([(float(t), p) for p, t in ticks(root, "yt", "y")])
    left_error = HISTORY[2][2] / span * 100.0  # +0.005 mA as left, in % of span
    hollow = starts(root, "as_left")
    assert len(hollow) == 5  # the as-left readings of the adjusted test, hollow
    x_adj = bx + ax * day(HISTORY[2][0])
    pieces = pieces_of(root, "s0")
    restart = [p for p in pieces if abs(p[0] - x_adj) < 0.3]
    assert len(restart) == 1
    x0, y0, x1, y1 = restart[0]
    # its first vertex is the as-left point: where the hollow mark is drawn, and where the axes put the error
    assert any(math.isclose(x0, hx, abs_tol=0.05) and math.isclose(y0, hy, abs_tol=0.05) for hx, hy in hollow)
    assert y0 == pytest.approx(by + ay * left_error, abs=0.3)
    # and it runs at the fitted rate
    rate = ((y1 - y0) / ay) / ((x1 - x0) / ax) * 365.25
    assert rate == pytest.approx(slope, rel=0.02)
    # the pieces follow one another in time: none runs back over another, so they cannot cross
    assert all(b[0] >= a[2] - 0.05 for a, b in zip(pieces, pieces[1:], strict=False))
    # the piece after the unadjusted 2025 test goes on from where the restarted one ended
    after = [p for p in pieces if abs(p[0] - (bx + ax * day(HISTORY[3][0]))) < 0.3]
    assert len(after) == 1 and after[0][1] == pytest.approx(y1, abs=0.05)
    # the text alternative says the same: every test date, and where the lines restart
    alt = charts.drift_alt(data)
    assert root[1].text == alt and all(d in alt for d, _f, _l in HISTORY)
    assert f"As-left errors (hollow marks) on {HISTORY[2][0]}." in alt
    assert f"The fitted lines restart at the as-left errors of {HISTORY[2][0]}." in alt


def test_handbook_charts_through_the_cli(tmp_path: Path) -> None:
    results = {f"t{i}.yaml": result_yaml(date=d, as_found=good_points(f),
                                         as_left=good_points(left) if left is not None else None)
               for i, (d, f, left) in enumerate(HISTORY)}
    ev = write_evidence(tmp_path / "ev", results, config="as_of = 2025-06-01\n")
    assert main(["run", str(ev), "--out", str(tmp_path / "out")]) in (0, 1)
    pages = sorted((tmp_path / "out" / "handbook").glob("*/*.html"))
    drawn = [svg for page in pages for svg in re.findall(r"<svg.*?</svg>", page.read_text(encoding="utf-8"), re.S)]
    assert len(drawn) == len(HISTORY) + 2  # one per test page, the latest and the history on the asset page
    for svg in drawn:
        root = parse(svg)
        assert root.attrib["role"] == "img" and "T-CT1" in (root[0].text or "")
        assert all_numbers_finite(root) and starts(root, "as_found")


def test_each_test_point_has_its_own_marker_dash_and_colour() -> None:
    data = drift_data()
    data["points"] = [{**p, "input_pct": x} for x in (0.0, 25.0, 50.0, 75.0, 100.0)
                      for p in data["points"][:5]]
    data["fits"] = [{**data["fits"][0], "input_pct": x} for x in (0.0, 25.0, 50.0, 75.0, 100.0)]
    root = parse(charts.drift_chart(data, "T"))
    shapes, dashes, colours = {}, {}, {}
    for p in root.iter(SVG + "path"):
        cls = p.attrib.get("class", "").split()
        series = next((c for c in cls if re.fullmatch(r"s\d+", c)), None)
        if series and "as_found" in cls:
            # every mark of a series is the same shape: the path after each 'M x,y'
            found = set(re.split(r"M-?[\d.]+,-?[\d.]+", p.attrib["d"])[1:])
            assert len(found) == 1
            shapes[series], colours[series] = found.pop(), p.attrib["fill"]
        if series and "fit" in cls:
            dashes[series] = p.attrib.get("stroke-dasharray", "solid")
    assert len(shapes) == 5
    # told apart by shape and by line dash, each on its own (so never by colour alone), and by colour too
    assert len(set(shapes.values())) == 5 and len(set(dashes.values())) == 5 and len(set(colours.values())) == 5
    # the key shows each series with its own shape and words
    key = next(g for g in root.iter(SVG + "g") if g.attrib.get("class") == "key")
    key_text = [t.text for t in key.iter(SVG + "text")]
    assert [f"{x:g} % input" for x in (0, 25, 50, 75, 100)] == [t for t in key_text if t and "% input" in t]
    key_shapes = {re.split(r"M-?[\d.]+,-?[\d.]+", p.attrib["d"])[1] for p in key.iter(SVG + "path")
                  if p.attrib["d"].count("M") == 1 and "m" in p.attrib["d"]}
    assert set(shapes.values()) <= key_shapes


def test_series_styles_do_not_repeat_within_many_series() -> None:
    styles = [svgplot.series_style(i) for i in range(21)]  # 21 points: 0, 5, ..., 100 %
    assert len(set(styles)) == len(styles)
    for a, b in zip(styles, styles[1:], strict=False):  # neighbours differ in shape and dash, not only in colour
        assert a[0] != b[0] and a[2] != b[2]


# --------------------------------------------------------------------------------------------------------
# square-root (DP flow) devices: % of flow below, % of ΔP along the top

def sqrt_data() -> dict[str, object]:
    pts = [{"phase": "as_found", "input_pct": x, "error_pct": e, "mpe_pct": 0.5, "accept_pct": 0.5, "U_pct": 0.05,
            "characteristic": "sqrt"} for x, e in ((0.0, 0.0), (1.0, 0.2), (6.25, 0.1), (25.0, 0.15),
                                                    (56.25, -0.1), (100.0, 0.05))]
    return {"points": pts}


def test_square_root_chart_puts_points_at_the_root_of_dp() -> None:
    data = sqrt_data()
    root = parse(charts.error_chart(data, "FT-1: test of 2026-08-12"))
    ax, bx = line_map([(float(t), p) for p, t in ticks(root, "xt", "x")])
    found = starts(root, "as_found")
    dp = np.array([p["input_pct"] for p in data["points"]])
    # flow = 100 sqrt(ΔP / 100) (Q ∝ √ΔP, common practice; numpy.sqrt is the reference for the root)
    flow = 100.0 * np.sqrt(dp / 100.0)
    assert [x for x, _y in found] == pytest.approx((bx + ax * flow).tolist(), abs=0.3)
    # the trade's landmark (README, common practice): 25 % of ΔP is 50 % of flow
    assert found[3][0] == pytest.approx(bx + ax * 50.0, abs=0.3)
    # the secondary axis along the top names % of ΔP where its root falls on the flow axis
    top = ticks(root, "xt-dp", "x")
    assert len(top) >= 5 and {"0", "100"} <= {t for _p, t in top}
    for p, t in top:
        assert p == pytest.approx(bx + ax * 100.0 * np.sqrt(float(t) / 100.0), abs=0.3)
    assert all(b[0] - a[0] > 10 for a, b in zip(top, top[1:], strict=False))  # labels apart, left to right
    texts = [t.text or "" for t in root.iter(SVG + "text")]
    assert "Flow (% of flow range)" in texts and "ΔP (% of input range)" in texts
    alt = charts.error_alt(data)
    assert alt.startswith("Chart of error against flow") and "10 % flow (1 % ΔP)" in alt


def test_linear_chart_has_no_dp_axis() -> None:
    root = parse(charts.error_chart(error_data(), "T"))
    assert not ticks(root, "xt-dp", "x")
    assert "Input (% of input range)" in [t.text for t in root.iter(SVG + "text")]


@pytest.mark.parametrize("name", list(WILD_ERROR))
def test_square_root_chart_survives_missing_and_wild_values(name: str) -> None:
    data = copy.deepcopy(WILD_ERROR[name])
    for p in data["points"]:
        p["characteristic"] = "sqrt"
    root = parse(charts.error_chart(data, f"T-1 {name}"))
    assert all_numbers_finite(root)
    assert len(ticks(root, "xt", "x")) >= 2
    assert len(ticks(root, "xt-dp", "x")) >= (2 if data["points"] else 0)  # no points: nothing says sqrt
    for x, y in starts(root, "pt"):
        assert svgplot.LEFT - 1 <= x <= svgplot.RIGHT + 1 and svgplot.TOP - 1 <= y <= svgplot.BOTTOM + 1


def test_square_root_device_through_the_cli(tmp_path: Path) -> None:
    """A DP flow transmitter (characteristic sqrt) judged and published: its test page's chart is drawn
    against % of flow, with the % of ΔP axis along the top."""
    from tests.evidence import CT_ASSET, INSTRUMENTS

    asset = {**CT_ASSET, "asset": "T-FT1", "signal": "process-transmitter", "input_min": 0, "input_max": 250,
             "input_unit": "mbar", "characteristic": "sqrt", "ct_ratio": None, "display_min": None,
             "display_max": None, "display_unit": None}
    source = {"kind": "source", "range": "1 bar", "accuracy": "0.025 %range", "calibrated": "2026-01-01",
              "due": "2027-01-01"}
    dp = [0.0, 1.0, 25.0, 56.25, 100.0]
    # the expected output of a square-root transmitter (README: 25 % ΔP = 50 % flow = 12 mA, common practice)
    points = [(f"{x} %", f"{4 + 16 * math.sqrt(x / 100):.4f} mA") for x in dp]
    ev = write_evidence(tmp_path / "ev", {"ft.yaml": result_yaml(asset="T-FT1", as_found=points)}, assets=[asset],
                        instruments={**INSTRUMENTS, "SRC-1": source})
    assert main(["run", str(ev), "--out", str(tmp_path / "out")]) in (0, 1)
    page = next((tmp_path / "out" / "handbook" / "tests").glob("*.html")).read_text(encoding="utf-8")
    root = parse(re.search(r"<svg.*?</svg>", page, re.S).group(0))
    ax, bx = line_map([(float(t), p) for p, t in ticks(root, "xt", "x")])
    xs = [x for x, _y in starts(root, "as_found")]
    assert xs == pytest.approx((bx + ax * 100.0 * np.sqrt(np.array(dp) / 100.0)).tolist(), abs=0.3)  # numpy.sqrt
    assert ticks(root, "xt-dp", "x") and "Flow (% of flow range)" in page


def test_a_fit_that_is_no_significant_trend_is_drawn_thin_and_said_so() -> None:
    data = drift_data()
    data["fits"][1]["status"] = "no significant trend"  # the 50 % point's fit
    data["fits"][0]["status"] = "trend"
    root = parse(charts.drift_chart(data, "T"))
    widths = [p.attrib["stroke-width"] for p in root.iter(SVG + "path") if "fit" in p.attrib.get("class", "").split()]
    assert widths == ["1.2", "0.7", "1.2"]  # no status (the third) draws as a fitted line
    assert "thin: no sig. trend" in [t.text for t in root.iter(SVG + "text")]
    alt = charts.drift_alt(data)
    assert "Fitted drift at 50 %: +0.050 % of span a year (no significant trend)." in alt
    assert "Fitted drift at 0 %: +0.050 % of span a year." in alt
