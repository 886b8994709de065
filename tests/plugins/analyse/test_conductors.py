"""Conductor resistance tables and copper's temperature correction (plugins/conductors.py)."""

from __future__ import annotations

import pandas as pd
import pytest
from loopledger.plugins.analyse import conductors

FT_PER_KM = 1000 / 0.3048  # exact: 1 ft = 0.3048 m (international foot)


@pytest.mark.parametrize(("mm2", "ohm_per_km"), [
    # IEC 60228, Table 1/2 (class 1 and 2, plain annealed copper), max DC resistance at 20 °C
    (0.5, 36.0), (0.75, 24.5), (1.0, 18.1), (1.5, 12.1), (2.5, 7.41), (4.0, 4.61), (6.0, 3.08),
])
def test_metric_sizes_match_iec_60228(mm2, ohm_per_km):
    assert conductors.mm2_ohm_per_km(pd.Series([mm2]))[0] == pytest.approx(ohm_per_km, abs=1e-9)


def test_a_size_outside_the_table_is_unknown_not_guessed():
    # IEC 60228 has no 0.6 mm² size: the burden check must say "unknown", not interpolate
    assert pd.isna(conductors.mm2_ohm_per_km(pd.Series([0.6]))[0])


@pytest.mark.parametrize(("awg", "ohm_per_kft"), [
    # solid annealed copper at 20 °C, Ω per 1000 ft, as printed in wire-gauge tables
    # (NBS Handbook 100, "Copper wire tables", from memory)
    (22, 16.14), (20, 10.15), (18, 6.385), (16, 4.016), (14, 2.525),
])
def test_awg_sizes_match_the_copper_wire_tables(awg, ohm_per_kft):
    per_km = conductors.awg_ohm_per_km(pd.Series([awg]))[0]
    assert per_km / FT_PER_KM * 1000 == pytest.approx(ohm_per_kft, rel=2e-3)


def test_awg_diameters_are_the_astm_b258_anchors():
    # ASTM B258 defines the series by its ends: 0000 = 0.4600 in and 36 = 0.0050 in
    assert conductors.awg_diameter_mm(-3) == pytest.approx(0.4600 * 25.4, rel=1e-9)
    assert conductors.awg_diameter_mm(36) == pytest.approx(0.0050 * 25.4, rel=1e-9)
    assert pd.isna(conductors.awg_ohm_per_km(pd.Series([22.5]))[0])  # no half gauges


def test_temperature_correction_uses_alpha_0_00393_at_20_c():
    # copper α20 = 0.00393 /K (IEC 60228 / IEC 60287 value for annealed copper, from memory)
    assert conductors.temperature_factor(20.0) == 1.0
    assert conductors.temperature_factor(30.0) == pytest.approx(1.0393, abs=1e-12)
    assert conductors.temperature_factor(0.0) == pytest.approx(1 - 20 * 0.00393, abs=1e-12)
    # and agrees with the inferred-zero form (234.5 + t) / 254.5 over site temperatures (within 0.01 %)
    for t in (-10.0, 0.0, 15.0, 40.0):
        assert conductors.temperature_factor(t) == pytest.approx((234.5 + t) / 254.5, rel=1e-4)


def test_loop_counts_both_conductors():
    # 100 m of 1.5 mm² out and back at 20 °C: 2 × 0.1 km × 12.1 Ω/km (IEC 60228) = 2.42 Ω
    r = conductors.loop_ohm(pd.Series([12.1]), pd.Series([100.0]), pd.Series([20.0]))[0]
    assert r == pytest.approx(2.42, abs=1e-12)
