"""Intervals: due dates, overdue, the staircase method, drift-limited intervals, EOPR, global false accept."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from loopledger import keys
from loopledger.cli import main
from loopledger.hookspecs import hookimpl
from loopledger.plugins.history import intervals
from scipy import stats

from tests.evidence import CT_ASSET, batch_and_alone, good_points, result_yaml, write_evidence

RULE = {"extend_within": 0.8, "extend_factor": 1.5, "shorten_factor": 0.5, "min_months": 1, "max_months": 100}


def test_staircase_follows_the_simple_reaction_rule():
    """ILAC-G24:2022 / OIML D 10:2022, method "automatic adjustment or staircase" (wording from memory):
    the next interval is extended when the instrument is found within e.g. 80 % of the MPE, and
    reduced when it is found outside the MPE. The factors are not given there; they are ours and
    configurable, so the test states them (1.5 and 0.5)."""
    ratio = np.array([0.5, 0.8, 0.81, 1.0, 1.01, 3.0])  # worst as-found |error| / MPE
    got = intervals.staircase(np.full(6, 12.0), ratio, RULE)
    assert list(got) == [18, 18, 12, 12, 6, 6]


def test_staircase_stays_within_the_configured_bounds():
    cfg = {**RULE, "min_months": 3, "max_months": 24}
    assert list(intervals.staircase([20.0, 4.0, 12.0], [0.1, 2.0, np.nan], cfg)) == [24, 3, 12]


def _two_assets() -> list[dict]:
    other = {**CT_ASSET, "asset": "T-CT2", "description": "Other transducer"}
    untested = {**CT_ASSET, "asset": "T-CT3", "description": "Never tested"}
    return [CT_ASSET, other, untested]


def test_overdue_is_judged_on_as_of(tmp_path, run_folder):
    """Next due = last test + interval_months (calendar months, common practice); overdue after that day."""
    ev = write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(date="2025-06-01", as_found=good_points(0.01)),
                                          "b.yaml": result_yaml(asset="T-CT2", date="2025-01-31",
                                                                as_found=good_points(0.01))},
                        assets=_two_assets())
    on_the_day = run_folder(ev, as_of="2026-06-01").extras["assets_summary"]
    assert on_the_day.at["T-CT1", "next_due"] == "2026-06-01"
    assert not on_the_day.at["T-CT1", "overdue"]
    assert on_the_day.at["T-CT2", "next_due"] == "2026-01-31"
    assert on_the_day.at["T-CT2", "overdue"]
    assert on_the_day.at["T-CT3", "overdue"] and on_the_day.at["T-CT3", "verdict"] == "untested"
    day_after = run_folder(ev, as_of="2026-06-02").extras["assets_summary"]
    assert day_after.at["T-CT1", "overdue"]


def test_each_asset_page_of_a_batch_shows_its_own_due_date(tmp_path, run_folder):
    """The same dates as above, on the pages: next due = last test + 12 calendar months (common practice)."""
    ev = write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(date="2025-06-01", as_found=good_points(0.01)),
                                          "b.yaml": result_yaml(asset="T-CT2", date="2025-01-31",
                                                                as_found=good_points(0.01))},
                        assets=_two_assets())
    ctx = run_folder(ev, as_of="2026-06-01")
    pages = batch_and_alone(intervals.ll_asset_sections, ctx, ["T-CT1", "T-CT2", "T-CT3"], arg="assets")
    facts = {asset: dict(sections[0].rows) for asset, sections in pages.items()}
    assert (facts["T-CT1"]["Last test"], facts["T-CT1"]["Next due"]) == ("2025-06-01", "2026-06-01")
    assert (facts["T-CT2"]["Last test"], facts["T-CT2"]["Next due"]) == ("2025-01-31", "2026-01-31")
    assert [facts[a]["Overdue on 2026-06-01"] for a in ("T-CT1", "T-CT2", "T-CT3")] == ["no", "yes", "yes"]
    assert facts["T-CT3"]["Latest verdict"] == "untested" and facts["T-CT3"]["Next due"] == "—"
    # EOPR of the signal type (both tests found in tolerance) is on the index page, not on each asset's
    assert facts["T-CT2"]["Fleet reliability (as found)"] == "by signal type on the handbook's index page"
    table = intervals.ll_fleet_sections(ctx)[0]
    assert table.rows == [("current-transducer", "100%", "2 of 2")]


def test_drift_shortens_the_recommended_interval(tmp_path, run_folder):
    offsets = [("2023-05-02", 0.010), ("2024-05-06", 0.040), ("2025-05-05", 0.065)]
    ev = write_evidence(tmp_path / "ev", {f"{d}.yaml": result_yaml(date=d, as_found=good_points(o))
                                          for d, o in offsets})
    ctx = run_folder(ev, as_of="2025-06-01")
    row = ctx.stash[keys.ASSETS_SUMMARY].loc["T-CT1"]
    # last as-found 0.065 of 0.08 mA = 81 % of the MPE: the staircase keeps 12 months
    assert row["staircase_months"] == 12
    # the drift line from numpy.polyfit reaches the 0.08 mA limit (0.5 % of span) months later
    days = pd.to_datetime([d for d, _ in offsets])
    x = np.asarray((days - days[0]).days / 365.25)
    slope, intercept = np.polyfit(x, [o / 16 * 100 for _, o in offsets], 1)
    months = np.floor(((0.5 - intercept) / slope - x[-1]) * 12)
    assert row["drift_months"] == months
    assert row["recommended_interval_months"] == months < 12
    assert row["interval_basis"] == "drift"
    assert row["predicted_before_due"]


def test_eopr_counts_per_signal_and_description(tmp_path, run_folder):
    """EOPR = in-tolerance as-found results / all as-found results (NCSL RP-1 definition, from memory)."""
    ev = write_evidence(tmp_path / "ev", {
        "a.yaml": result_yaml(date="2024-01-10", as_found=good_points(0.01)),
        "b.yaml": result_yaml(date="2025-01-10", as_found=good_points(0.10), as_left=good_points(0.0)),
        "c.yaml": result_yaml(date="2026-01-10", as_found=good_points(0.02)),
        "d.yaml": result_yaml(asset="T-CT2", date="2026-02-10", as_found=good_points(0.02)),
    }, assets=_two_assets())
    e = run_folder(ev).extras["eopr"].set_index(["group_by", "group"])
    assert tuple(e.loc[("signal", "current-transducer"), ["n", "in_tolerance"]]) == (4, 3)
    assert e.loc[("signal", "current-transducer"), "eopr"] == pytest.approx(0.75)
    assert tuple(e.loc[("description", "Test current transducer"), ["n", "in_tolerance"]]) == (3, 2)
    assert tuple(e.loc[("description", "Other transducer"), ["n", "in_tolerance"]]) == (1, 1)


@pytest.mark.parametrize("tur, eopr, expected", [(4, 0.95, 0.0086), (4, 0.89, 0.0146), (4, 0.80, 0.0197),
                                                 (1, 0.95, 0.0180)])
def test_global_false_accept_matches_the_check_values(tur, eopr, expected):
    """Check values from /work/shared/domain.md (calc: bivariate normal model, TUR = MPE / U, U = 2u,
    acceptance limit = MPE): 0.86 %, 1.46 %, 1.97 %, 1.80 %."""
    mpe = 1.0
    u = mpe / tur / 2.0
    got = intervals.global_false_accept(mpe, mpe, u, eopr)
    assert float(got) == pytest.approx(expected, abs=0.00005)


@pytest.mark.parametrize("accept, u, eopr", [(0.8, 0.25, 0.9), (1.0, 0.5, 0.7), (0.6, 0.1, 0.99)])
def test_global_false_accept_against_scipy_multivariate_normal(accept, u, eopr):
    """The Owen's-T evaluation against scipy.stats.multivariate_normal (calc), guard-banded cases too."""
    mpe = 1.0
    sp = mpe / stats.norm.ppf((1 + eopr) / 2)
    mvn = stats.multivariate_normal(mean=[0, 0], cov=[[sp**2, sp**2], [sp**2, sp**2 + u**2]])
    big = 60.0 * sp
    # P(true > mpe, -accept <= measured <= accept), doubled by symmetry
    one_side = (mvn.cdf([big, accept]) - mvn.cdf([mpe, accept])) - (mvn.cdf([big, -accept]) - mvn.cdf([mpe, -accept]))
    assert float(intervals.global_false_accept(mpe, accept, u, eopr)) == pytest.approx(2 * one_side, abs=2e-6)


class _FixedU:
    """Plumbing: an uncertainty stage giving every point U = 0.08 mA (k = 2, so u = 0.04 mA), i.e. TUR 1 on
    class 0.5 (the stage contract, loopledger.schemas.stages.UncertainPoints, asks for u, U and k)."""

    @hookimpl
    def ll_uncertainty(self, ctx):
        ctx.points["u"] = 0.04
        ctx.points["U"] = 0.08
        ctx.points["k"] = 2.0
        return []


def test_false_accept_per_test_where_u_exists_and_flag_above_2_percent(tmp_path, pm, run_folder):
    """The prior is the signal type's in-tolerance probability before the test: none for the first test, from
    1 of 1 for the second, 1 of 2 for the third (the second failed as found). prior_min_count = 1 here so that
    three files give priors at all.

    issue 22: this test once pinned the raw ratio k / n as the prior (1 of 1 → 100 %, clipped to 99.99 %);
    it now pins the mean of the Beta(1 + k, 1 + n − k) posterior, (k + 1) / (n + 2): 2/3 for 1 of 1, 1/2
    for 1 of 2 (the Beta-binomial posterior mean, checked below with scipy.stats.beta)."""
    ev = write_evidence(tmp_path / "ev", {
        "a.yaml": result_yaml(date="2024-01-10", as_found=good_points(0.02)),
        "b.yaml": result_yaml(date="2025-01-10", as_found=good_points(0.10), as_left=good_points(0.0)),
        "c.yaml": result_yaml(date="2026-01-10", as_found=good_points(0.02)),
    })
    pm.unregister(name="uncertainty")  # the built-in budget stage (issue 3) would give every point a U
    plain = run_folder(ev)
    assert "global_false_accept" not in plain.tests.columns  # no U: the column is simply absent
    pm.register(_FixedU())
    ctx = run_folder(ev, intervals={"prior_min_count": 1})
    by_file = ctx.tests.set_index("source_file")["global_false_accept"]
    assert stats.beta(1 + 1, 1 + 1).mean() == pytest.approx(0.5) and stats.beta(2, 1).mean() == pytest.approx(2 / 3)
    expected = float(intervals.global_false_accept(0.08, 0.08, 0.04, 0.5))  # 1 of 2 before c: Beta(2, 2), mean 1/2
    assert by_file["results/c.yaml"] == pytest.approx(expected)
    b_value = float(intervals.global_false_accept(0.08, 0.08, 0.04, 2 / 3))  # 1 of 1 before b: Beta(2, 1)
    assert by_file["results/b.yaml"] == pytest.approx(b_value)
    assert np.isnan(by_file["results/a.yaml"])  # nothing before it to set a prior
    counts = ctx.tests.set_index("source_file")[["prior_n", "prior_in_tolerance"]]
    files = ["results/a.yaml", "results/b.yaml", "results/c.yaml"]
    assert counts.loc[files].values.tolist() == [[0, 0], [1, 1], [2, 1]]
    # issue 22: with the prior 2/3 (not 99.99 %) b's probability is above 2 % as well, so both are flagged
    assert expected > 0.02 and by_file["results/b.yaml"] > 0.02
    flagged = [f.file for f in ctx.findings if f.code == "false-accept"]
    assert flagged == ["results/b.yaml", "results/c.yaml"]
    ids = ctx.tests.set_index("source_file")["test"]
    pages = batch_and_alone(intervals.ll_test_sections, ctx, list(ctx.tests["test"]))
    assert [tuple(r) for r in pages[ids["results/c.yaml"]][0].rows] == [
        ("Probability (bivariate normal model)", f"{expected:.2%}"),
        ("Prior: the signal type's in-tolerance probability",
         f"50.0% (Beta(1, 1) prior updated with 1 of 2 as-found results before the test; 95 % interval "
         f"{stats.beta(2, 2).ppf(0.025):.1%} to {stats.beta(2, 2).ppf(0.975):.1%})"),
        ("Target", "≤ 2% — exceeded")]
    assert [tuple(r) for r in pages[ids["results/a.yaml"]][0].rows] == [
        ("Probability (bivariate normal model)", "— (not worked out)"),
        ("Prior: the signal type's in-tolerance probability", "none (no earlier as-found result of its signal type)"),
        ("Target", "—")]


def _prior_by_hand(tests: pd.DataFrame, signal: dict[str, str]) -> list[tuple[int, int]]:
    """The definition read literally, one test at a time: (in tolerance, n) over the valid pass/fail as-found
    results of the same signal type dated strictly before the test."""
    out = []
    for _, t in tests.iterrows():
        earlier = [o for _, o in tests.iterrows() if o["valid"] and o["as_found"] in ("pass", "fail")
                   and signal.get(o["asset"]) == signal.get(t["asset"]) and signal.get(t["asset"]) is not None
                   and isinstance(o["date"], str) and isinstance(t["date"], str) and o["date"] < t["date"]]
        out.append((sum(o["as_found"] == "pass" for o in earlier), len(earlier)))
    return out


def test_prior_counts_only_earlier_results_of_the_same_signal_type():
    rng = np.random.default_rng(7)
    n = 60
    tests = pd.DataFrame({
        "test": [f"t{i}" for i in range(n)],
        "asset": rng.choice(["A", "B", "C", "X"], n),  # X is not registered
        "date": [f"202{rng.integers(0, 4)}-0{rng.integers(1, 4)}-1{rng.integers(0, 3)}" if i % 17 else None
                 for i in range(n)],
        "valid": rng.random(n) > 0.1,
        "as_found": rng.choice(["pass", "fail", "conditional-pass", ""], n, p=[0.6, 0.2, 0.1, 0.1]),
    })
    signal = {"A": "current-transducer", "B": "current-transducer", "C": "rtd-transmitter"}
    assets = pd.DataFrame({"asset": list(signal), "signal": list(signal.values())}).set_index("asset", drop=False)
    got = intervals.prior_reliability(tests, assets)
    assert list(zip(got["in_tolerance"], got["n"], strict=True)) == _prior_by_hand(tests, signal)
    with_n = got["n"] > 0
    assert np.allclose(got.loc[with_n, "eopr"], got.loc[with_n, "in_tolerance"] / got.loc[with_n, "n"])
    assert got.loc[~with_n, "eopr"].isna().all()
    # a test dated after all the others leaves every earlier test's prior as it was
    later = pd.concat([tests, pd.DataFrame({"test": ["new"], "asset": ["A"], "date": ["2099-01-01"], "valid": [True],
                                            "as_found": ["fail"]})], ignore_index=True)
    again = intervals.prior_reliability(later, assets)
    pd.testing.assert_frame_equal(again.iloc[:n], got)


def test_bad_interval_settings_are_a_configuration_error(tmp_path):
    ev = write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(as_found=good_points(0.01))},
                        config='as_of = 2026-11-30\n[intervals]\nextend_factor = 0.5\n')
    assert main(["run", str(ev), "--out", str(tmp_path / "out")]) == 3


def test_cli_writes_assets_csv(tmp_path):
    ev = write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(date="2025-06-01", as_found=good_points(0.01))},
                        config='as_of = 2026-11-30\n[intervals]\nextend_factor = 1.5\n')
    assert main(["run", str(ev), "--out", str(tmp_path / "out"), "--as-of", "2026-01-01"]) == 0
    assets = pd.read_csv(tmp_path / "out" / "data" / "assets.csv", keep_default_na=False).set_index("asset")
    for col in ("last_test", "verdict", "next_due", "overdue", "drift_pct_span_per_year", "drift_stderr",
                "predicted_out_of_tolerance", "recommended_interval_months"):
        assert col in assets.columns
    row = assets.loc["T-CT1"]
    assert (row["last_test"], row["verdict"], row["next_due"], row["overdue"]) == (
        "2025-06-01", "pass", "2026-06-01", False)
    assert float(row["recommended_interval_months"]) == 18  # 0.01 of 0.08 mA found: 12 × 1.5
    page = (tmp_path / "out" / "handbook" / "assets" / "T-CT1.html").read_text(encoding="utf-8")
    assert "Recommended interval" in page and "18 months (staircase)" in page


def test_bayesian_prior_needs_a_minimum_count_and_shows_its_interval():
    """Beta(1, 1) prior on the in-tolerance rate, updated with k of n: posterior Beta(1 + k, 1 + n − k), mean
    (k + 1)/(n + 2), 95 % equal-tailed interval from scipy.stats.beta.ppf. Below the minimum count there is
    no prior (issue 22: one earlier pass once gave a 99.99 % prior and a 3 × 10⁻⁵ probability)."""
    got = intervals.bayes_prior([1, 5, 20, 20], [1, 5, 19, 20], 5)
    assert got["mean"].isna().tolist() == [True, False, False, False]
    for row, (n, k) in zip(range(1, 4), [(5, 5), (20, 19), (20, 20)], strict=True):
        post = stats.beta(1 + k, 1 + n - k)
        assert got.at[row, "mean"] == pytest.approx(post.mean(), rel=1e-12)
        assert got.at[row, "low"] == pytest.approx(post.ppf(0.025), rel=1e-9)
        assert got.at[row, "high"] == pytest.approx(post.ppf(0.975), rel=1e-9)
    assert "at least 5" in intervals.prior_text(1, 1, float("nan"), float("nan"), float("nan"), 5)
