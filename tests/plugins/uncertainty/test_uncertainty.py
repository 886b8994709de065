"""The uncertainty stage (plugins/uncertainty.py and its budget in plugins/budget.py).

Reference values come from JCGM 100:2008 (GUM), JCGM 101:2008 and scipy/numpy as named beside
each check; the rigs are invented fixtures.
"""

from __future__ import annotations

import copy
import math

import numpy as np
import pandas as pd
import pytest
from loopledger import keys
from loopledger.cli import main
from loopledger.plugins.uncertainty import budget
from scipy import stats

from tests.evidence import CT_ASSET, INSTRUMENTS, blocks, good_points, result_yaml, write_evidence

#: a calibrator-grade source and the meter/shunt of the issue's worked point (fixture data)
RIG = copy.deepcopy(INSTRUMENTS)
RIG["CAL-1"] = {"kind": "source", "range": "1 A", "accuracy": "0.01 %rdg"}


def shunt_point(tmp_path, run_folder, reading="1.2003 V", ambient=23.0, rule="simple"):
    doc = result_yaml(method="shunt", as_found=[("50 %", reading)], ambient_c=ambient,
                      instruments={"source": "CAL-1", "meter": "DMM-1", "shunt": "SH-100"})
    ev = write_evidence(tmp_path / "ev", {"w.yaml": doc}, instruments=RIG,
                        config=f'as_of = 2026-11-30\n[decision]\nrule = "{rule}"\n')
    return run_folder(ev)


def terms_of(ctx):
    frame = ctx.stash[keys.BUDGET]
    return frame.set_index("component")


def test_worked_shunt_point_term_by_term(tmp_path, run_folder):
    """A point worked by hand (JCGM 100:2008 §5.1, rectangular divisor √3 per §4.3.7).

    Rig: 100 Ω ±0.01 % shunt (5 ppm/K, 23 °C reference, ambient 23 °C); meter 2 V range
    ±(0.05 %rdg + 2 digits), resolution 0.1 mV; reading 1.2003 V at 50 % of a 0-1 A → 4-20 mA
    transducer; source ±0.01 %rdg. I = V / R = 12.003 mA, so ∂I/∂V = 1/R = 10 mA/V and
    ∂I/∂R = −I/R = −0.12003 mA/Ω; d output / d input = 16 mA / 1 A.

    - meter accuracy: a = 0.0005 × 1.2003 V + 2 × 0.0001 V = 0.00080015 V;
      u = a/√3 = 0.000461967 V; × 10 mA/V = 0.00461967 mA
    - meter resolution: a = 0.0001/2 = 0.00005 V; u = 0.0000288675 V; × 10 = 0.000288675 mA
    - shunt tolerance: a = 100 Ω × 0.0001 = 0.01 Ω; u = 0.00577350 Ω; × 0.12003 = 0.000692994 mA
    - shunt tempco: 5e-6/K × |23 − 23| K = 0 → 0 mA
    - source: a = 0.0001 × 0.5 A = 0.00005 A; u = 0.0000288675 A; × 16 mA/A = 0.000461880 mA
    - u_c = √(0.00461967² + 0.000288675² + 0.000692994² + 0.000461880²) = 0.00470300 mA
    - every term type B, so k = 2 and U = 0.00940601 mA.
    """
    ctx = shunt_point(tmp_path, run_folder)
    terms = terms_of(ctx)
    expected = {"meter accuracy": (0.00080015, 0.00461967), "meter resolution": (0.00005, 0.000288675),
                "shunt tolerance": (0.01, 0.000692994), "shunt tempco": (0.0, 0.0),
                "source": (0.00005, 0.000461880)}
    assert set(terms.index) == set(expected)
    for name, (half, contribution) in expected.items():
        assert terms.at[name, "half_width"] == pytest.approx(half, rel=1e-6, abs=1e-12), name
        assert terms.at[name, "contribution"] == pytest.approx(contribution, rel=1e-5, abs=1e-12), name
        assert terms.at[name, "divisor"] == pytest.approx(math.sqrt(3)), name
    point = ctx.points.iloc[0]
    assert point["u"] == pytest.approx(0.00470300, rel=1e-5)
    assert point["k"] == 2.0
    assert point["U"] == pytest.approx(0.00940601, rel=1e-5)


def test_the_tempco_term_uses_the_distance_from_the_reference_temperature(tmp_path, run_folder):
    """5 ppm/K × |33 − 23| K × 100 Ω = 0.005 Ω half-width (datasheet arithmetic, common practice)."""
    ctx = shunt_point(tmp_path, run_folder, ambient=33.0)
    assert terms_of(ctx).at["shunt tempco", "half_width"] == pytest.approx(0.005, rel=1e-9)


def test_rectangular_divisor_is_root_three():
    """A rectangular distribution of half-width a has u = a/√3 (JCGM 100:2008 §4.3.7);
    checked against scipy.stats.uniform's standard deviation."""
    idx = pd.Index([0])
    term = budget._term(idx, "x", "rectangular", [0.6], "V", budget.SQRT3, [1.0])
    assert term["contribution"].iloc[0] == pytest.approx(stats.uniform(loc=-0.6, scale=1.2).std(), rel=1e-12)


def test_welch_satterthwaite_formula():
    """ν_eff = u_c⁴ / Σ u_i⁴/ν_i (JCGM 100:2008 G.2b). Worked by hand: u = 0.3 (ν = 4) and
    0.4 (type B, ν = ∞): u_c = 0.5, ν_eff = 0.0625 / (0.0081/4) = 30.864."""
    assert budget.welch_satterthwaite(0.5, [0.3, 0.4], [4, math.inf]) == pytest.approx(30.8642, rel=1e-4)
    assert budget.welch_satterthwaite(0.5, [0.3, 0.4], [math.inf, math.inf]) == math.inf


def test_coverage_factor_matches_gum_table_g2_and_scipy():
    """k for p = 95.45 %: GUM Table G.2 (JCGM 100:2008) as listed in domain.md, to its printed
    rounding; and scipy.stats.t.ppf(0.977250, ν) (reference library)."""
    table = {1: 13.97, 2: 4.53, 3: 3.31, 4: 2.87, 5: 2.65, 10: 2.28, 20: 2.13, 50: 2.05, 100: 2.025}
    nu = np.array(list(table), dtype=float)
    k = budget.coverage_factor(nu)
    for got, want in zip(k, table.values(), strict=True):
        assert got == pytest.approx(want, abs=0.006)
    assert k == pytest.approx(stats.t.ppf(0.977250, nu), rel=1e-5)
    assert budget.coverage_factor([math.inf])[0] == 2.0


def test_repeat_readings_add_a_type_a_term_and_finite_dof(tmp_path, run_folder):
    """Type A u = s/√n with n − 1 degrees of freedom (JCGM 100:2008 §4.2.3); ν_eff from G.2b and
    k from scipy's Student t at 95.45 %."""
    import yaml

    doc = yaml.safe_load(result_yaml(as_found=[("50 %", "12.000 mA")],
                                     instruments={"source": "CAL-1", "meter": "DMM-1"}))
    readings = [12.004, 12.010, 11.998, 12.006]
    doc["as_found"] = [{"input": "50 %", "readings": [f"{r} mA" for r in readings]}]
    ev = write_evidence(tmp_path / "ev", {"r.yaml": yaml.safe_dump(doc)}, instruments=RIG)
    ctx = run_folder(ev)
    terms = terms_of(ctx)
    s = float(np.std(readings, ddof=1))
    assert terms.at["repeatability", "contribution"] == pytest.approx(s / 2.0, rel=1e-9)
    assert terms.at["repeatability", "dof"] == 3
    point = ctx.points.iloc[0]
    u_c = math.sqrt(float((terms["contribution"] ** 2).sum()))
    nu = u_c ** 4 / ((s / 2.0) ** 4 / 3)
    assert point["nu_eff"] == pytest.approx(nu, rel=1e-9)
    assert point["k"] == pytest.approx(stats.t.ppf(0.977250, nu), rel=1e-5)


def test_gum_result_agrees_with_monte_carlo_for_a_shunt_point(tmp_path, run_folder):
    """JCGM 101:2008 propagation of distributions with numpy (seeded, 200 000 trials) of
    I = (V + δ_acc + δ_res) / (R + δ_R) + c_src·δ_src, each δ rectangular over its half-width.

    The standard deviation agrees with the GUM's u within 2 %; with one rectangular term
    dominating, the 95.45 % coverage interval is shorter than k = 2 gives (JCGM 101 shows the
    same for dominant rectangular inputs), so U is conservative.
    """
    ctx = shunt_point(tmp_path, run_folder)
    point = ctx.points.iloc[0]
    rng = np.random.default_rng(20260414)
    n = 200_000
    volts = 1.2003 + rng.uniform(-0.00080015, 0.00080015, n) + rng.uniform(-0.00005, 0.00005, n)
    ohms = 100.0 + rng.uniform(-0.01, 0.01, n)
    source = 16.0 * rng.uniform(-0.00005, 0.00005, n)
    current_ma = volts / ohms * 1000.0 + source
    assert float(np.std(current_ma)) == pytest.approx(point["u"], rel=0.02)
    low, high = np.quantile(current_ma, [(1 - 0.9545) / 2, (1 + 0.9545) / 2])
    assert (high - low) / 2 <= point["U"]
    assert (high - low) / 2 == pytest.approx(point["U"], rel=0.2)


def test_meter_accuracy_is_the_largest_term_for_shunt_and_direct(tmp_path, run_folder):
    """With a calibrator-grade source, the output meter's accuracy dominates the budget of both
    the shunt and the direct method (common practice: the reading instrument is the weak link)."""
    direct = result_yaml(as_found=[("50 %", "12.003 mA")], instruments={"source": "CAL-1", "meter": "DMM-1"})
    shunt = result_yaml(method="shunt", date="2026-04-15", as_found=[("50 %", "1.2003 V")],
                        instruments={"source": "CAL-1", "meter": "DMM-1", "shunt": "SH-100"})
    ev = write_evidence(tmp_path / "ev", {"d.yaml": direct, "s.yaml": shunt}, instruments=RIG)
    ctx = run_folder(ev)
    frame = ctx.stash[keys.BUDGET]
    for test, rows in frame.groupby("test"):
        assert rows.loc[rows["contribution"].idxmax(), "component"] == "meter accuracy", test


def test_smallest_range_that_holds_the_reading_is_used(tmp_path, run_folder):
    """2 V holds 1.2003 V, 20 V would too: the 2 V range's 0.1 mV resolution must be used."""
    ctx = shunt_point(tmp_path, run_folder)
    assert terms_of(ctx).at["meter resolution", "half_width"] == pytest.approx(0.00005)


def test_missing_range_is_an_error_under_guarded_and_a_warning_under_simple(tmp_path, run_folder):
    rig = copy.deepcopy(RIG)
    rig["DMM-1"]["ranges"] = [r for r in rig["DMM-1"]["ranges"] if not r["range"].endswith("V")]
    doc = result_yaml(method="shunt", as_found=good_points(shunt=True),
                      instruments={"source": "CAL-1", "meter": "DMM-1", "shunt": "SH-100"})
    ev = write_evidence(tmp_path / "ev", {"s.yaml": doc}, instruments=rig)
    simple = run_folder(ev)
    found = [f for f in simple.findings if f.code == "uncertainty-incomplete"]
    assert found and found[0].severity == "warning" and found[0].file == "results/s.yaml"
    assert list(simple.tests["verdict"]) == ["pass"]
    assert simple.points["U"].isna().all()
    guarded = run_folder(ev, decision={"rule": "guarded"})
    found = [f for f in guarded.findings if f.code == "uncertainty-incomplete"]
    assert found[0].severity == "error" and found[0].field == "instruments" and found[0].line > 0
    assert list(guarded.tests["verdict"]) == ["invalid"]


def test_cli_run_exports_u_columns_and_budget_csv(tmp_path):
    ev = write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(as_found=good_points(0.002),
                                                               instruments={"source": "CAL-1", "meter": "DMM-1"})},
                        instruments=RIG)
    out = tmp_path / "out"
    assert main(["run", str(ev), "--out", str(out), "--no-handbook"]) == 0
    points = pd.read_csv(out / "data" / "points.csv")
    for col in ("u", "U", "k", "nu_eff", "tur", "risk"):
        assert col in points.columns
    assert (points["U"] > 0).all()
    frame = pd.read_csv(out / "data" / "budget.csv")
    assert list(frame.columns[:11]) == ["test", "phase", "point", "component", "distribution", "half_width", "unit",
                                        "divisor", "sensitivity", "contribution", "dof"]
    # u is the root sum of squares of the exported contributions (JCGM 100:2008 eq. 10, uncorrelated)
    rss = frame.groupby("point")["contribution"].apply(lambda c: math.sqrt(float((c ** 2).sum())))
    assert points.set_index("point")["u"].to_numpy() == pytest.approx(rss.to_numpy(), rel=1e-9)


def test_the_digits_written_pick_the_range_over_its_nominal_value(tmp_path, run_folder):
    """2.0016 V needs the 20 V range by size, but its 0.1 mV digit can only come from the 2 V range
    (1 mV resolution on 20 V): the meter was over-ranging on 2 V (common practice; meters read
    past the nominal range). Half a digit is then 0.05 mV."""
    ctx = shunt_point(tmp_path, run_folder, reading="2.0016 V")
    terms = terms_of(ctx)
    assert terms.at["meter resolution", "half_width"] == pytest.approx(0.00005)
    assert terms.at["meter accuracy", "half_width"] == pytest.approx(0.0005 * 2.0016 + 2 * 0.0001)


def test_display_method_budget(tmp_path, run_folder):
    """A control-system display 0-2000 A for 4-20 mA: d output / d reading = 16/2000 = 0.008 mA/A.
    Resolution from the digits written (1000.5 A → 0.1 A): a = 0.05 A, u = 0.05/√3 × 0.008 =
    0.000230940 mA; display_accuracy 0.1 %span: a = 2 A, u = 2/√3 × 0.008 = 0.00923760 mA
    (datasheet arithmetic; JCGM 100:2008 §4.3.7 for the divisor). No meter term."""
    doc = result_yaml(method="display", as_found=[("50 %", "1000.5 A")], instruments={"source": "CAL-1"})
    ev = write_evidence(tmp_path / "ev", {"d.yaml": doc}, instruments=RIG)
    lines = (ev / "assets.csv").read_text(encoding="utf-8").splitlines()
    (ev / "assets.csv").write_text(f"{lines[0]},display_accuracy\n{lines[1]},0.1 %span\n", encoding="utf-8")
    ctx = run_folder(ev)
    terms = terms_of(ctx)
    assert set(terms.index) == {"display resolution", "display accuracy", "source"}
    assert terms.at["display resolution", "contribution"] == pytest.approx(0.000230940, rel=1e-5)
    assert terms.at["display accuracy", "contribution"] == pytest.approx(0.00923760, rel=1e-5)


def test_square_root_zero_gets_a_monte_carlo_u_not_an_invalid_file(tmp_path, run_folder):
    """d√x/dx is infinite at x = 0 (calculus): the linear GUM propagation cannot carry the source
    term there. issue 22: this test once pinned "no U and a warning" for that point; the point is now
    propagated by Monte Carlo (JCGM 101 §7), so it has a U, says which method gave it, and the file is
    judged. The calibrator's 0.01 %rdg is zero at 0 A, so U there is the meter's alone: the GUM result
    for the other terms (linear) must agree with the simulation to two significant digits."""
    asset = {**CT_ASSET, "characteristic": "sqrt"}
    points = [("0 %", "4.000 mA"), ("25 %", "12.000 mA"), ("100 %", "20.000 mA")]
    doc = result_yaml(as_found=points, instruments={"source": "CAL-1", "meter": "DMM-1"})
    ev = write_evidence(tmp_path / "ev", {"q.yaml": doc}, assets=[asset], instruments=RIG)
    ctx = run_folder(ev, decision={"rule": "guarded"})
    assert not [f for f in ctx.findings if f.code == "uncertainty-incomplete"]
    assert ctx.points["U"].notna().all()
    assert ctx.points["u_method"].tolist()[0] == "Monte Carlo (JCGM 101)"
    assert list(ctx.tests["valid"]) == [True]
    terms = ctx.extras["budget"]
    first = terms[(terms["point"] == 1) & (terms["component"] != "source")]
    u_gum = float(np.sqrt((first["contribution"] ** 2).sum()))
    assert ctx.points["u"].iloc[0] == pytest.approx(u_gum, rel=0.01)


@pytest.mark.parametrize("reading,half_digit", [("2.00200 V", 0.00005), ("2.5 V", 0.0005), ("2.5000 V", 0.0005)])
def test_range_choice_when_digits_say_little(tmp_path, run_folder, reading, half_digit):
    """Digits finer than any range shows count as the finest range's (2.00200 V → the 2 V range,
    over-ranging); a reading above the 2 V range's reach is on 20 V whatever is written (common
    practice for the fixture's 2 V / 20 V meter)."""
    ctx = shunt_point(tmp_path, run_folder, reading=reading)
    assert terms_of(ctx).at["meter resolution", "half_width"] == pytest.approx(half_digit)


def test_counts_read_from_the_control_system_need_no_meter(tmp_path, run_folder):
    """A 12-bit card, 0..4095 counts over 4-20 mA: one count is 16/4095 mA, so half a count
    rectangular is 0.5/√3 × 16/4095 = 0.00112795 mA (arithmetic; JCGM 100:2008 §4.3.7)."""
    asset = {**CT_ASSET, "counts_min": 0, "counts_max": 4095}
    doc = result_yaml(method="counts", as_found=[("50 %", "2048 counts")], instruments={"source": "CAL-1"})
    ev = write_evidence(tmp_path / "ev", {"c.yaml": doc}, assets=[asset], instruments=RIG)
    lines = (ev / "assets.csv").read_text(encoding="utf-8").splitlines()
    if "counts_min" not in lines[0]:
        (ev / "assets.csv").write_text(f"{lines[0]},counts_min,counts_max\n{lines[1]},0,4095\n", encoding="utf-8")
    ctx = run_folder(ev)
    assert not [f for f in ctx.findings if f.code == "uncertainty-incomplete"]
    terms = terms_of(ctx)
    assert set(terms.index) == {"display resolution", "source"}
    assert terms.at["display resolution", "contribution"] == pytest.approx(0.5 / math.sqrt(3) * 16 / 4095, rel=1e-6)


def test_a_batch_gives_each_test_page_its_own_points_and_terms(tmp_path, run_folder):
    """Pages asked for together get what each gets alone, built from that test's points only."""
    files = {"d.yaml": result_yaml(as_found=good_points(0.002), instruments={"source": "CAL-1", "meter": "DMM-1"}),
             "s.yaml": result_yaml(method="shunt", date="2026-05-01", as_found=good_points(0.004, shunt=True)[:2],
                                   instruments={"source": "CAL-1", "meter": "DMM-1", "shunt": "SH-100"}),
             "o.yaml": result_yaml(asset="T-CT2", as_found=[("50 %", "12.011 mA")],
                                   instruments={"source": "CAL-1", "meter": "DMM-1"})}
    ev = write_evidence(tmp_path / "ev", files, instruments=RIG,
                        assets=[CT_ASSET, {**CT_ASSET, "asset": "T-CT2", "accuracy": "0.2"}])
    ctx = run_folder(ev)
    hook = ctx.pm.hook
    tests = list(ctx.tests["test"])
    titles = ("Uncertainty and specific risk per point", "Uncertainty budget")

    def mine(found, test):
        return [s for s in blocks(found, test) if s.title.startswith(titles)]

    together = hook.ll_test_sections(ctx=ctx, tests=tests)
    for test in tests:
        points, terms = mine(together, test)
        assert [points, terms] == mine(hook.ll_test_sections(ctx=ctx, tests=[test]), test)
        pts = ctx.points[ctx.points["test"] == test].sort_values(["phase", "point"])
        assert [row[5] for row in points.rows] == [f"{u:.4g}" for u in pts["U"]]
        # u is the root sum of squares of the contributions shown (JCGM 100:2008 eq. 10), to 4 digits
        for row in points.rows:
            shown = [float(t[7]) for t in terms.rows if t[:2] == row[:2]]
            assert math.sqrt(sum(c * c for c in shown)) == pytest.approx(float(row[2]), rel=2e-3)


def test_page_numbers_follow_the_general_format_with_a_dash_and_infinity():
    """Python's format-spec 'g' (4 significant digits) for numbers, '—' for missing, '∞' for infinite.

    -0.0 keeps its sign ('-0' in the 'g' format) although it equals 0.0: values are told apart by their bits.
    """
    from loopledger.plugins.uncertainty.uncertainty import fmt_all

    values = [1234567.0, 2.5e-05, 0.0, -0.0, np.nan, np.inf, -np.inf, 2.5e-05, 12.0]
    expected = [format(v, ".4g") if np.isfinite(v) else ("—" if np.isnan(v) else "∞") for v in values]
    assert expected[3] == "-0"
    assert list(fmt_all(np.array(values))) == expected
    assert list(fmt_all(pd.Series([1.5, None, "n/a"], dtype=object))) == ["1.5", "—", "n/a"]
    assert list(fmt_all(np.array([3, 3, 12345]), 3)) == ["3", "3", "1.23e+04"]


@pytest.mark.parametrize("rule", ["simple", "guarded"])
def test_a_reading_beyond_the_largest_range_has_no_u_and_a_warning(tmp_path, run_folder, rule):
    """A 30 mA reading on the fixture meter whose only current range is 20 mA: 30 > 20 × (1 + 10 %
    over-range allowance), so its specification does not cover the reading (common practice: a meter's
    accuracy is stated for readings within its range). The point has no U, a warning says why (under
    any rule), and the other points are judged."""
    points = good_points(0.0)
    points[-1] = ("100 %", "30.000 mA")
    ev = write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(as_found=points)},
                        config=f'as_of = 2026-11-30\n[decision]\nrule = "{rule}"\n')
    ctx = run_folder(ev)
    found = [f for f in ctx.findings if f.code == "uncertainty-incomplete"]
    assert len(found) == 1 and found[0].severity == "warning" and "largest range" in found[0].message
    assert found[0].point == "as_found #5"
    assert math.isnan(ctx.points["U"].iloc[-1]) and ctx.points["U"].iloc[:-1].notna().all()
    assert list(ctx.tests["valid"]) == [True]


def test_a_reading_within_the_over_range_allowance_keeps_its_u(tmp_path, run_folder):
    """21.5 mA on a 20 mA range is within the 10 % allowance (meters read a little past the nominal
    range, common practice), so it keeps its budget."""
    points = good_points(0.0)
    points[-1] = ("100 %", "21.500 mA")
    ctx = run_folder(write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(as_found=points)}))
    assert ctx.points["U"].notna().all()
