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
import pandas as pd
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


def mid_year(year: int) -> float:
    """Days since 1970-01-01 of the middle of ``year`` (where the drift chart centres its year label)."""
    start, end = dt.date(year, 1, 1), dt.date(year + 1, 1, 1)
    return (start - dt.date(1970, 1, 1)).days + (end - start).days / 2


def day(text: str) -> float:
    return float((dt.date.fromisoformat(text) - dt.date(1970, 1, 1)).days)


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

def test_drift_chart_dates_land_in_their_year() -> None:
    data = drift_data()
    root = parse(charts.drift_chart(data, "T-1"))
    years = ticks(root, "xt", "x")
    assert [t for _p, t in years] == ["2021", "2022", "2023", "2024", "2025"]
    ax, bx = line_map([(mid_year(int(t)), p) for p, t in years])
    ay, by = line_map([(float(t), p) for p, t in ticks(root, "yt", "y")])
    found = starts(root, "as_found")
    assert len(found) == 15
    # 50 % input on 2023-03-01: error 0.05 * 2 + 0.05 = 0.15 %
    assert (pytest.approx(bx + ax * day("2023-03-01"), abs=0.2), pytest.approx(by + ay * 0.15, abs=0.2)) in found
    # one fitted line per test point, from the first test on to the as-of date
    pieces = starts(root, "fit")
    assert len(pieces) == 3 * 5
    assert min(x for x, _y in pieces) == pytest.approx(bx + ax * day("2021-03-01"), abs=0.2)


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
    years = [t for _p, t in ticks(root, "xt", "x")]
    assert years and all(re.fullmatch(r"\d{4}", t) for t in years)
    for x, y in starts(root, "pt"):
        assert svgplot.LEFT - 1 <= x <= svgplot.RIGHT + 1 and svgplot.TOP - 1 <= y <= svgplot.BOTTOM + 1
    assert charts.drift_alt(WILD_DRIFT[name]).startswith("Chart of as-found error over time")


def test_thirty_years_are_labelled_every_five() -> None:
    years = [int(t) for _p, t in ticks(parse(charts.drift_chart(WILD_DRIFT["thirty years"], "T")), "xt", "x")]
    assert years == list(range(1995, 2030, 5))


def test_drift_line_follows_readings_after_an_adjustment(tmp_path: Path, run_folder) -> None:
    results = {f"t{i}.yaml": result_yaml(date=d, as_found=good_points(f),
                                         as_left=good_points(left) if left is not None else None)
               for i, (d, f, left) in enumerate(HISTORY)}
    ctx = run_folder(write_evidence(tmp_path / "ev", results, config="as_of = 2025-06-01\n"))
    data = asset_pages.drift_charts(ctx, ctx.assets.loc[["T-CT1"]], ctx.points)["T-CT1"]
    pts = pd.DataFrame(data["points"])
    fit = data["fits"][0]
    assert {"trims_pct", "as_left_pct"} <= set(pts.columns)
    last = pts[(pts["input_pct"] == fit["input_pct"]) & (pts["date"] == "2025-03-01")].iloc[0]
    years = (pd.Timestamp("2025-03-01") - pd.Timestamp(fit["ref_date"])).days / 365.25
    on_line = float(fit["intercept_pct"]) + float(fit["slope_pct_per_year"]) * years
    # the trim made in 2024 (0.085 mA = 0.53 % of the 16 mA span) must be taken off the line after it
    assert float(last["trims_pct"]) > 0.4
    assert abs(on_line - float(last["trims_pct"]) - float(last["error_pct"])) < abs(on_line - float(last["error_pct"]))
    # and the chart draws it so: a line piece starts at the last test, lowered by the trim
    root = parse(charts.drift_chart(data, "T-CT1"))
    ax, bx = line_map([(mid_year(int(t)), p) for p, t in ticks(root, "xt", "x")])
    ay, by = line_map([(float(t), p) for p, t in ticks(root, "yt", "y")])
    x_last = bx + ax * day("2025-03-01")
    pieces = [(x, y) for x, y in starts(root, "fit") if abs(x - x_last) < 0.3]
    assert any(y == pytest.approx(by + ay * (on_line - float(last["trims_pct"])), abs=0.3) for _x, y in pieces)
    assert not any(y == pytest.approx(by + ay * on_line, abs=0.3) for _x, y in pieces)
    assert len(starts(root, "as_left")) == 5  # the as-left readings of the adjusted test, hollow


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
