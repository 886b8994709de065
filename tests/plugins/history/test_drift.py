"""Drift: least-squares rate per asset and test point, reset at each adjustment.

Reference: numpy.polyfit and scipy.stats.linregress (general-purpose reference
libraries) fitted to a history built by hand in each test. The model being
checked: after an adjustment a point drifts from its as-left error, so the
trim (as-found − as-left) is added back to every later as-found error before
the straight line is fitted.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from loopledger import keys
from loopledger.cli import main
from loopledger.plugins.history import drift
from scipy import stats

from tests.evidence import CT_ASSET, batch_and_alone, good_points, result_yaml, write_evidence

MPE_MA = 0.08  # class 0.5 on a 16 mA span (the fixture asset)
SPAN_MA = 16.0


def _history(rows: list[tuple[str, float, float | None]], input_pct: float = 50.0) -> pd.DataFrame:
    """(date, as-found %, as-left % or None) -> the history table drift works from."""
    return pd.DataFrame({
        "asset": "A", "test": [f"t{i}" for i in range(len(rows))], "date": [r[0] for r in rows],
        "input_pct": input_pct, "as_found_pct": [r[1] for r in rows],
        "as_left_pct": [np.nan if r[2] is None else r[2] for r in rows], "mpe_pct": 0.5, "limit_pct": 0.5,
    })


def _years(dates: list[str]) -> np.ndarray:
    d = pd.to_datetime(pd.Series(dates))
    return ((d - d.min()).dt.days / 365.25).to_numpy()


def test_rate_and_standard_error_match_linregress_across_an_adjustment():
    rows = [("2020-03-01", 0.10, None), ("2021-03-03", 0.21, None), ("2022-02-27", 0.33, 0.02),
            ("2023-03-05", 0.12, None), ("2024-03-01", 0.25, None)]
    pts = drift.drift_points(_history(rows))
    fits = drift.fit(pts)
    # by hand: the 2022 trim of 0.33 − 0.02 = 0.31 is added back to the later as-found errors
    y = np.array([0.10, 0.21, 0.33, 0.12 + 0.31, 0.25 + 0.31])
    x = _years([r[0] for r in rows])
    ref = stats.linregress(x, y)
    slope, intercept = np.polyfit(x, y, 1)
    got = fits.iloc[0]
    assert got["n"] == 5
    assert got["slope_pct_per_year"] == pytest.approx(slope, rel=1e-9)
    assert got["slope_pct_per_year"] == pytest.approx(ref.slope, rel=1e-9)
    assert got["intercept_pct"] == pytest.approx(intercept, rel=1e-9)
    assert got["stderr"] == pytest.approx(ref.stderr, rel=1e-9)
    assert got["p_value"] == pytest.approx(ref.pvalue, rel=1e-6)
    # the fitted error now is on the device as it is, i.e. less the trim
    assert got["fitted_now_pct"] == pytest.approx(intercept + slope * x[-1] - 0.31, rel=1e-9)


def test_baseline_is_the_previous_as_left_after_an_adjustment():
    rows = [("2020-01-01", 0.10, None), ("2021-01-01", 0.40, 0.05), ("2022-01-01", 0.20, None)]
    pts = drift.drift_points(_history(rows)).set_index("test")
    assert np.isnan(pts.at["t0", "baseline_pct"])
    assert pts.at["t1", "baseline_pct"] == pytest.approx(0.10)  # no adjustment before: drifts from as-found
    assert pts.at["t2", "baseline_pct"] == pytest.approx(0.05)  # adjusted in 2021: drifts from the as-left
    assert pts.at["t2", "drift_pct"] == pytest.approx(0.15)


def test_refuses_to_fit_two_tests():
    """Two points always lie on a line: a rate from them is no evidence of drift."""
    fits = drift.fit(drift.drift_points(_history([("2020-01-01", 0.1, None), ("2021-01-01", 0.3, None)])))
    row = fits.iloc[0]
    assert row["status"] == "too few tests"
    assert np.isnan(row["slope_pct_per_year"]) and np.isnan(row["stderr"])
    assert pd.isna(row["predicted_out_of_tolerance"])


def test_predicted_date_is_where_the_polyfit_line_meets_the_mpe():
    rows = [("2020-01-01", 0.10, None), ("2021-01-01", 0.21, None), ("2022-01-01", 0.29, None),
            ("2023-01-01", 0.41, None)]
    fits = drift.fit(drift.drift_points(_history(rows)))
    x = _years([r[0] for r in rows])
    slope, intercept = np.polyfit(x, [r[1] for r in rows], 1)
    years = (0.5 - intercept) / slope
    expected = pd.Timestamp("2020-01-01") + pd.to_timedelta(round(years * 365.25), unit="D")
    assert fits.iloc[0]["status"] == "trend"
    assert fits.iloc[0]["predicted_out_of_tolerance"] == expected.strftime("%Y-%m-%d")


def test_no_date_without_a_significant_slope():
    """Scatter with no trend: the t test on the slope (scipy.stats.linregress p-value) keeps the date empty."""
    rows = [("2020-01-01", 0.10, None), ("2021-01-01", 0.30, None), ("2022-01-01", 0.05, None),
            ("2023-01-01", 0.28, None), ("2024-01-01", 0.12, None)]
    fits = drift.fit(drift.drift_points(_history(rows)))
    ref = stats.linregress(_years([r[0] for r in rows]), [r[1] for r in rows])
    assert ref.pvalue > 0.05
    assert fits.iloc[0]["status"] == "no significant trend"
    assert pd.isna(fits.iloc[0]["predicted_out_of_tolerance"])


def _files(offsets: list[tuple[str, float, float | None]]) -> dict[str, str]:
    out = {}
    for date, found, left in offsets:
        out[f"{date}.yaml"] = result_yaml(date=date, as_found=good_points(found),
                                          as_left=good_points(left) if left is not None else None)
    return out


def test_pipeline_fit_matches_linregress(tmp_path, run_folder):
    offsets = [("2021-02-01", 0.010, None), ("2022-02-03", 0.022, None), ("2023-02-01", 0.035, None),
               ("2024-01-30", 0.090, 0.004), ("2025-02-04", 0.017, None)]
    ev = write_evidence(tmp_path / "ev", _files(offsets))
    ctx = run_folder(ev)
    fits = ctx.stash[keys.DRIFT_FITS]
    assert sorted(fits["input_pct"]) == [0, 25, 50, 75, 100]
    trims_before = np.array([0, 0, 0, 0, 0.090 - 0.004])  # the 2024 trim applies to the 2025 result
    y = (np.array([o[1] for o in offsets]) + trims_before) / SPAN_MA * 100
    ref = stats.linregress(_years([o[0] for o in offsets]), y)
    row = fits[fits["input_pct"] == 50].iloc[0]
    assert row["slope_pct_per_year"] == pytest.approx(ref.slope, rel=1e-6)
    assert row["stderr"] == pytest.approx(ref.stderr, rel=1e-6)
    points = ctx.stash[keys.DRIFT_POINTS]
    last = points[(points["input_pct"] == 50) & (points["date"] == "2025-02-04")].iloc[0]
    assert last["baseline_pct"] == pytest.approx(0.004 / SPAN_MA * 100, rel=1e-6)


def test_each_asset_page_of_a_batch_shows_its_own_fits(tmp_path, run_folder):
    """The page's rate at 50 % is scipy.stats.linregress's slope; an asset tested once has too few tests."""
    offsets = [("2021-02-01", 0.010, None), ("2022-02-03", 0.022, None), ("2023-02-01", 0.035, None)]
    files = {**_files(offsets), "other.yaml": result_yaml(asset="T-CT2", date="2024-02-01",
                                                          as_found=good_points(0.01))}
    ev = write_evidence(tmp_path / "ev", files, assets=[CT_ASSET, {**CT_ASSET, "asset": "T-CT2"}])
    pages = batch_and_alone(drift.ll_asset_sections, run_folder(ev), ["T-CT1", "T-CT2"], arg="assets")
    rows = {asset: {row[0]: row for row in sections[0].rows} for asset, sections in pages.items()}
    ref = stats.linregress(_years([o[0] for o in offsets]), [o[1] / SPAN_MA * 100 for o in offsets])
    assert rows["T-CT1"]["50 %"][1] == "3"
    assert float(rows["T-CT1"]["50 %"][2]) == pytest.approx(ref.slope, abs=5e-5)  # shown to 4 decimals
    assert [row[1] for row in rows["T-CT2"].values()] == ["1"] * 5
    assert {row[7] for row in rows["T-CT2"].values()} == {"too few tests"}


def test_cli_writes_drift_tables(tmp_path):
    """End to end through the CLI: drift.csv holds one fit per point; two tests give 'too few tests'."""
    ev = write_evidence(tmp_path / "ev", _files([("2024-03-01", 0.01, None), ("2025-03-01", 0.03, None)]))
    code = main(["run", str(ev), "--out", str(tmp_path / "out"), "--no-handbook"])
    assert code == 0
    fits = pd.read_csv(tmp_path / "out" / "data" / "drift.csv")
    assert len(fits) == 5
    assert set(fits["status"]) == {"too few tests"}
    assets = pd.read_csv(tmp_path / "out" / "data" / "assets.csv")
    assert assets.loc[0, "drift_status"] == "too few tests"
    assert np.isnan(assets.loc[0, "drift_pct_span_per_year"])


def test_acceptance_limit_date_comes_before_the_mpe_date_under_a_guard_band():
    """With a guard band (ILAC-G8:2019 §4.2.2: acceptance limit = tolerance limit − w) the fitted line
    reaches the acceptance limit first; both dates are where the numpy.polyfit line meets each limit."""
    rows = [("2020-01-01", 0.10, None), ("2021-01-01", 0.21, None), ("2022-01-01", 0.29, None),
            ("2023-01-01", 0.41, None)]
    hist = _history(rows).assign(limit_pct=0.4)  # MPE 0.5 % of span, w = 0.1 % of span
    row = drift.fit(drift.drift_points(hist)).iloc[0]
    x = _years([r[0] for r in rows])
    slope, intercept = np.polyfit(x, [r[1] for r in rows], 1)
    for column, limit in (("predicted_acceptance_limit", 0.4), ("predicted_out_of_tolerance", 0.5)):
        days = round((limit - intercept) / slope * 365.25)
        assert row[column] == (pd.Timestamp("2020-01-01") + pd.Timedelta(days=days)).strftime("%Y-%m-%d")
    assert row["predicted_acceptance_limit"] < row["predicted_out_of_tolerance"]


def test_a_falling_error_is_predicted_against_the_lower_limit():
    """Drift downwards meets −MPE: the crossing of the polyfit line with −0.5 % of span."""
    rows = [("2020-01-01", -0.05, None), ("2021-01-01", -0.16, None), ("2022-01-01", -0.24, None),
            ("2023-01-01", -0.36, None)]
    row = drift.fit(drift.drift_points(_history(rows))).iloc[0]
    x = _years([r[0] for r in rows])
    slope, intercept = np.polyfit(x, [r[1] for r in rows], 1)
    days = round((-0.5 - intercept) / slope * 365.25)
    assert row["predicted_out_of_tolerance"] == (pd.Timestamp("2020-01-01") + pd.Timedelta(days=days)).strftime(
        "%Y-%m-%d")


def test_a_test_with_only_an_as_left_breaks_the_chain():
    """No as-found at a point means the drift up to that test is unknown: only later results are fitted
    (scipy.stats.linregress over those alone)."""
    rows = [("2019-01-01", 0.10, None), ("2020-01-01", 0.20, None), ("2021-01-01", None, 0.0),
            ("2022-01-01", 0.10, None), ("2023-01-01", 0.19, None), ("2024-01-01", 0.31, None)]
    hist = _history([(d, np.nan if f is None else f, left) for d, f, left in rows])
    row = drift.fit(drift.drift_points(hist)).iloc[0]
    later = rows[3:]
    ref = stats.linregress(_years([r[0] for r in later]), [r[1] for r in later])
    assert (row["n"], row["ref_date"]) == (3, "2022-01-01")
    assert row["slope_pct_per_year"] == pytest.approx(ref.slope, rel=1e-9)
